"""Where the cases of a sweep run: this process, a pool of local worker processes, or dask.distributed.

Every executor runs the same function, `run_case`, and yields ``(index, CaseOutcome)`` as cases complete (in
any order); the caller puts the results back in job order, so the Dataset does not depend on the executor.

Local workers are long-lived processes (one pipe each), started with the "forkserver" method where the
platform has it (the server imports the solvus engine once and forks clean single-threaded copies of itself)
and "spawn" elsewhere; the calling process is never forked, since forking a process that runs threads (dask,
tqdm, a notebook) can deadlock. A compiled thermo system is cached per process, so an idle worker takes, in
this order: a pending case of a system it has built already, a case of a system no worker has built, any case.
A worker that dies (killed, out of memory) fails its case with a message and is replaced.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import signal
import sys
from collections.abc import Iterator, Sequence
from multiprocessing.connection import wait
from typing import Any

from solubility.errors import InputError
from solubility.sweeps.case import Case
from solubility.sweeps.store import CaseOutcome

__all__ = ["DaskExecutor", "LocalPool", "SerialExecutor", "default_workers", "run_case", "start_method"]

Item = tuple[int, Case]


def run_case(case: Case) -> CaseOutcome:
    """Compute one case with `solubility.solvus`; any exception becomes a failed outcome with its message."""
    try:
        from solubility.api import solvus

        ds = solvus(
            case.database,
            case.phase,
            case.solute,
            list(case.temperatures),
            exclude=case.exclude,
            fix=case.solvus_fix,
            balance=case.balance,
            pressure=case.pressure,
        )
    except Exception as exc:  # a sweep records the failure of one case and goes on
        return CaseOutcome(status="failed", error=one_line(exc))
    return CaseOutcome(status="ok", data=ds)


def one_line(exc: BaseException) -> str:
    """``"ExceptionType: message"`` on one line."""
    text = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def default_workers() -> int:
    """The number of CPUs this process may use."""
    if hasattr(os, "process_cpu_count"):  # Python >= 3.13
        return os.process_cpu_count() or 1
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0)) or 1
    return os.cpu_count() or 1


def start_method() -> str:
    """ "forkserver" where available (Linux and other POSIX systems but macOS), else "spawn"."""
    if sys.platform != "darwin" and "forkserver" in multiprocessing.get_all_start_methods():
        return "forkserver"
    return "spawn"


class SerialExecutor:
    """Run every case in the calling process, one after the other (``workers=0``)."""

    def run(self, items: Sequence[Item]) -> Iterator[tuple[int, CaseOutcome]]:
        for index, case in items:
            yield index, run_case(case)


def _worker_main(conn) -> None:
    """Body of a local worker: receive a case, send its outcome, until the pipe closes or None arrives."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent handles Ctrl-C and stops its workers
    while True:
        try:
            case = conn.recv()
        except (EOFError, OSError):
            return
        if case is None:
            return
        try:
            conn.send(run_case(case))
        except (BrokenPipeError, OSError):
            return


class _Worker:
    """One long-lived worker process and its pipe."""

    def __init__(self, ctx) -> None:
        self.conn, child = ctx.Pipe()
        self.process = ctx.Process(target=_worker_main, args=(child,), daemon=True, name="solubility-sweep")
        self.process.start()
        child.close()
        self.systems: set[tuple] = set()
        self.item: Item | None = None

    def submit(self, item: Item) -> None:
        self.item = item
        self.systems.add(item[1].system_key)
        self.conn.send(item[1])

    def receive(self) -> tuple[int, CaseOutcome]:
        index, _case = self.item  # type: ignore[misc]
        self.item = None
        try:
            return index, self.conn.recv()
        except (EOFError, OSError):
            self.process.join(timeout=5)
            code = self.process.exitcode
            return index, CaseOutcome(
                status="failed", error=f"WorkerDied: worker process exited (status {code})"
            )

    def stop(self, *, now: bool) -> None:
        if not now and self.process.is_alive():
            with contextlib.suppress(OSError):
                self.conn.send(None)
            self.process.join(timeout=10)
        if self.process.is_alive():
            self.process.terminate()
            self.process.join(timeout=10)
        self.conn.close()


#: modules the fork server imports once, so that forked workers start with them loaded (about 3 s each)
PRELOAD = (
    "solubility.sweeps.executors",
    "solubility.calc.boundary",
    "solubility.calc.inputs",
    "solubility.thermo.system",
    "solubility.databases.reader",
    "solubility.results.dataset",
    "xarray",
    "pycalphad",
    "pycalphad.core.utils",
    "pycalphad.codegen.phase_record_factory",
)


def _context():
    method = start_method()
    ctx = multiprocessing.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(list(PRELOAD))
    return ctx


class LocalPool:
    """A pool of `workers` long-lived local processes with system affinity (see the module docstring)."""

    def __init__(self, workers: int) -> None:
        if workers < 1:
            raise InputError(f"workers must be at least 1 for a process pool, got {workers}")
        self.workers = workers

    def run(self, items: Sequence[Item]) -> Iterator[tuple[int, CaseOutcome]]:
        pending = list(items)
        if not pending:
            return
        ctx = _context()
        pool = [_Worker(ctx) for _ in range(min(self.workers, len(pending)))]
        finished = False
        try:
            for worker in pool:
                _assign(worker, pool, pending)
            while any(w.item is not None for w in pool):
                busy = {w.conn: w for w in pool if w.item is not None}
                for conn in wait(list(busy)):
                    worker = busy[conn]
                    result = worker.receive()
                    if not worker.process.is_alive() and worker.process.exitcode is not None:
                        worker.stop(now=True)
                        pool[pool.index(worker)] = worker = _Worker(ctx)
                    yield result
                    _assign(worker, pool, pending)
            finished = True
        finally:
            for worker in pool:
                worker.stop(now=not finished)


def _assign(worker: _Worker, pool: list[_Worker], pending: list[Item]) -> None:
    """Give `worker` a case: of a system it has built, else of a system nobody has built, else the next."""
    if not pending:
        return
    others = set().union(*(w.systems for w in pool if w is not worker))
    choice = next((i for i, (_, c) in enumerate(pending) if c.system_key in worker.systems), None)
    if choice is None:
        choice = next((i for i, (_, c) in enumerate(pending) if c.system_key not in others), 0)
    worker.submit(pending.pop(choice))


class DaskExecutor:
    """Run the cases on a dask.distributed cluster.

    Parameters
    ----------
    scheduler
        A scheduler address (``"tcp://host:8786"``), a ``distributed.Client`` or a cluster object (such as
        ``distributed.LocalCluster``). A client made here is closed at the end; one given is left open.

    Notes
    -----
    Cases of one system are sent preferably to one worker (a soft restriction, so idle workers still steal).
    Workers should run one thread each (``threads_per_worker=1``): the solvus engine holds the GIL.
    """

    def __init__(self, scheduler: Any) -> None:
        try:
            import distributed
        except ImportError:
            raise InputError(
                "a dask scheduler needs dask.distributed: pip install 'solubility[dask]'"
            ) from None
        self._distributed = distributed
        self._scheduler = scheduler

    @contextlib.contextmanager
    def _client(self):
        distributed = self._distributed
        scheduler = self._scheduler
        if isinstance(scheduler, distributed.Client):
            yield scheduler
            return
        target = scheduler
        if not isinstance(scheduler, str) and not hasattr(scheduler, "scheduler_address"):
            raise InputError(
                "scheduler must be an address string, a distributed.Client or a cluster,"
                f" got {type(scheduler).__name__}"
            )
        try:
            client = distributed.Client(target, timeout="10s", set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise InputError(f"cannot connect to the dask scheduler {scheduler!r}: {exc}") from None
        try:
            yield client
        finally:
            client.close()

    def run(self, items: Sequence[Item]) -> Iterator[tuple[int, CaseOutcome]]:
        if not items:
            return
        with self._client() as client:
            workers = sorted(client.scheduler_info(n_workers=-1)["workers"]) or [None]
            home: dict[tuple, Any] = {}
            futures = {}
            for index, case in items:
                where = home.setdefault(case.system_key, workers[len(home) % len(workers)])
                restriction = {"workers": [where], "allow_other_workers": True} if where else {}
                future = client.submit(run_case, case, pure=False, **restriction)
                futures[future] = index
            try:
                for future in self._distributed.as_completed(list(futures), loop=client.loop):
                    try:
                        outcome = future.result()
                    except Exception as exc:  # the cluster lost the task (a worker died, ...)
                        outcome = CaseOutcome(status="failed", error=one_line(exc))
                    yield futures[future], outcome
            finally:
                client.cancel(list(futures))
