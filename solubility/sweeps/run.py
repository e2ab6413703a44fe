"""`sweep`: run many cases (in this process, a local process pool or dask.distributed), store, assemble.

The local pool is a `concurrent.futures.ProcessPoolExecutor` started with "forkserver" where there is one (the
server imports the engine once; the caller, which may run threads, is never forked), else "spawn". Cases go
grouped by compiled system (database, elements, phases), so that a worker mostly meets a system it has built;
dask schedules the cases on its own. Both give futures, collected as they complete.
"""

from __future__ import annotations

import asyncio
import multiprocessing
import os
import re
import signal
import sys
from collections.abc import Callable, Iterable, Iterator, Mapping
from concurrent.futures import ProcessPoolExecutor, as_completed
from typing import Any

from solubility import errors
from solubility.errors import InputError, JobError, SolubilityError
from solubility.sweeps.assemble import assemble
from solubility.sweeps.job import Case, check_unique_names
from solubility.sweeps.store import Store

__all__ = ["DEFAULT_CONNECT_TIMEOUT", "Progress", "check_databases", "run_case", "sweep"]

#: seconds to wait for a dask scheduler to answer before giving up
DEFAULT_CONNECT_TIMEOUT = 10.0
_ADDRESS = re.compile(r"^(tcp|tls)://(\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9.-]+):(\d{1,5})$|^inproc://[\w./-]+$")
#: modules the fork server imports once, so that workers start with them loaded
PRELOAD = ("solubility.sweeps.run", "solubility.calc.boundary", "solubility.thermo.system", "xarray", "pycalphad")


def run_case(case: Case) -> tuple[str, Any]:
    """``("", Dataset)`` for a case computed by `solubility.solvus` (or `solubility.uptake` for an uptake case),
    ``("Type: message", None)`` if it failed."""
    from solubility import solvus, uptake
    from solubility.sweeps.kinds import uptake_arguments

    engine, extra = (uptake, uptake_arguments(case)) if case.kind == "uptake" else (solvus, {})
    try:
        return "", engine(case.database, case.phase, case.solute, list(case.temperatures), exclude=case.exclude,
                          fix=case.solvus_fix, balance=case.balance, pressure=case.pressure, **extra)
    except Exception as exc:  # a sweep records the failure of one case and goes on
        return one_line(exc), None


def one_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def sweep(cases: Iterable[Case | Mapping[str, Any]], *, workers: int | None = None, scheduler: Any = None,
          store=None, resume: bool = False, progress: bool | Callable | None = None, strict: bool = False,
          overwrite: bool = False, connect_timeout: float = DEFAULT_CONNECT_TIMEOUT):
    """Compute the solvus (or uptake) of many cases and gather them in one Dataset along ``case``.

    Parameters
    ----------
    cases
        `Case` objects or mappings of a case's keys, names unique; all validated, every database read, first.
    workers, scheduler
        Local worker processes (default one per CPU, at most one per case; 0: this process), or a dask
        scheduler instead: an address ``tcp://HOST:PORT``, a ``distributed.Client`` or a cluster.
    store, resume, overwrite
        Folder where each finished case is written at once, locked while the sweep runs
        (`solubility.sweeps.store`); keep its finished cases and run the others; start it afresh.
    progress
        True: a tqdm bar on standard error; or ``f(done, total, case, status)``, called first with
        ``(cases taken from the store, total, None, "start")`` then after every case.
    strict
        Raise the error of the first failed case (named after the case) instead of recording it.
    connect_timeout
        Seconds to wait for the dask scheduler to answer.

    Returns
    -------
    xarray.Dataset
        Dims ``case`` and ``T`` (K) as `solubility.sweeps.assemble` describes, whichever executor ran it.

    Raises
    ------
    JobError, InputError
        A case or option is invalid, or a database lacks what a case asks for (before any work).
    OutputError
        The store cannot be used, is locked, is damaged (`DamagedStoreError`) or cannot be written.
    """
    case_list = _as_cases(cases)
    if scheduler is not None and workers is not None:
        raise InputError("give workers or scheduler, not both (dask workers are set up on the cluster)")
    if resume and store is None:
        raise InputError("resume needs a store (the folder of the run to resume)")
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 0):
        raise InputError(f"workers must be a whole number >= 0 (0: run in this process), got {workers!r}")
    if progress not in (None, False, True) and not callable(progress):
        raise InputError(f"progress must be True, False, None or a callable, got {type(progress).__name__}")
    if isinstance(scheduler, str):
        check_address(scheduler)
    check_databases(case_list)
    own = progress = Progress() if progress is True else progress
    st = Store.open(store, case_list, resume=resume, overwrite=overwrite) if store is not None else None
    outcomes: Any = ()
    try:
        results = st.finished() if (st is not None and resume) else {}
        failed: dict[int, str] = {}
        todo = [(i, c) for i, c in enumerate(case_list) if i not in results]
        if progress:
            progress(len(results), len(case_list), None, "start")
        if not todo or (workers == 0 and scheduler is None):
            outcomes = ((i, *run_case(c)) for i, c in todo)
        elif scheduler is not None:
            outcomes = _dask(todo, scheduler, connect_timeout)
        else:
            outcomes = _local(todo, min(workers or _cpus(), len(todo)))
        for index, error, ds in outcomes:
            if error and strict:
                raise _case_error(case_list[index], error)
            if error:
                failed[index] = error
            else:
                if st is not None:
                    st.write(index, ds)
                results[index] = ds
            if progress:
                progress(len(results) + len(failed), len(case_list), case_list[index], "failed" if error else "ok")
    finally:
        getattr(outcomes, "close", lambda: None)()  # a generator's finally: stop workers, cancel tasks
        if isinstance(own, Progress):
            own.close()
        if st is not None:
            st.close()
    return assemble(case_list, results, failed)


def _as_cases(cases) -> list[Case]:
    if isinstance(cases, Case | Mapping | str):
        raise JobError("cases must be a list of Case objects or of mappings; for a job file use read_job(path)")
    out = []
    for i, case in enumerate(cases, start=1):
        if not isinstance(case, Case | Mapping):
            raise JobError(f"case {i}: expected a Case or a mapping, got {type(case).__name__}")
        out.append(case if isinstance(case, Case) else Case.from_mapping(case, f"case {i}"))
    if not out:
        raise JobError("no cases to run")
    check_unique_names(out, [f"case {i} ({c.name!r})" for i, c in enumerate(out, start=1)])
    return out


def check_databases(cases: list[Case]) -> None:
    """Check every case against its database before any work (each database read once), naming case and key."""
    from solubility.calc.inputs import host_elements
    from solubility.databases.reader import check_elements, check_phases, load_database

    loaded: dict[str, Any] = {}
    for case in cases:
        where = f"case {case.name!r}"
        try:
            ldb = loaded[case.database] = loaded.get(case.database) or load_database(case.database)
        except SolubilityError as exc:
            raise JobError(f"{where}: key 'database': {exc}") from None
        for key, check, names in (("phase", check_phases, [case.phase]), ("exclude", check_phases, case.exclude),
                                  ("solute", check_elements, [case.solute]),
                                  ("fix", check_elements, list(case.fix_dict)),
                                  ("reference", check_phases, [case.reference] if case.reference else []),
                                  ("balance", check_elements, [case.balance] if case.balance else [])):
            try:
                if names:
                    check(ldb, list(names))
            except SolubilityError as exc:
                raise JobError(f"{where}: key {key!r}: {exc}") from None
        try:  # the host must be (hosts)a(X,VA)c over the case's elements
            host_elements(ldb, case.phase, case.solute, case.fix_dict, case.balance)
        except SolubilityError as exc:
            raise JobError(f"{where}: {exc}") from None


def _case_error(case: Case, message: str) -> SolubilityError:
    kind, _, text = message.partition(": ")
    cls = getattr(errors, kind, None)
    if isinstance(cls, type) and issubclass(cls, SolubilityError):
        return cls(f"case {case.name!r}: {text}")
    return SolubilityError(f"case {case.name!r} failed: {message}")


class Progress:
    """A `sweep` progress callable: a tqdm bar on standard error (`bar` False: counting only).

    ``done`` counts the finished cases (those taken from the store too), ``ran`` the cases run by this sweep.
    """

    def __init__(self, bar: bool = True) -> None:
        self.bar: Any = bar
        self.done = self.ran = 0

    def __call__(self, done: int, total: int, case: Case | None, status: str) -> None:
        from tqdm import tqdm

        self.done, self.ran = done, self.ran + (case is not None)
        if case is None and not hasattr(self.bar, "update"):
            self.bar = tqdm(total=total, initial=done, unit="case", file=sys.stderr, dynamic_ncols=True, desc="sweep",
                            disable=self.bar is not True)
        elif case is not None:
            self.bar.set_postfix_str(f"{case.name}: {status}", refresh=False)
            self.bar.update(1)

    def close(self) -> None:
        """Close the bar."""
        getattr(self.bar, "close", lambda: None)()


def _cpus() -> int:
    return len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1


def _ignore_sigint() -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C reaches the whole group; the parent stops the workers
    signal.signal(signal.SIGTERM, signal.SIG_DFL)


def _outcomes(futures: dict, completed: Iterable, died: str = "") -> Iterator[tuple[int, str, Any]]:
    """``(index, error, Dataset)`` of each future as it completes; a lost task (its worker died) is an error."""
    for future in completed:
        try:
            error, ds = future.result()
        except Exception as exc:
            error, ds = f"{died}{one_line(exc)}", None
        yield futures[future], error, ds


def _local(items: list[tuple[int, Case]], workers: int) -> Iterator[tuple[int, str, Any]]:
    forkserver = sys.platform != "darwin" and "forkserver" in multiprocessing.get_all_start_methods()
    ctx = multiprocessing.get_context("forkserver" if forkserver else "spawn")
    if forkserver:
        ctx.set_forkserver_preload(list(PRELOAD))
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_ignore_sigint)
    first: dict[tuple, int] = {}  # a system's cases one after the other: a worker mostly meets a system it built
    items = sorted(items, key=lambda item: first.setdefault(item[1].system_key, len(first)))
    try:
        futures = {pool.submit(run_case, case): index for index, case in items}
        yield from _outcomes(futures, as_completed(futures), "WorkerDied: ")  # BrokenProcessPool: a worker died
    except BaseException:  # interrupted or closed early: stop the workers now rather than after their current case
        processes = list((getattr(pool, "_processes", None) or {}).values())
        pool.shutdown(wait=False, cancel_futures=True)
        for process in processes:
            process.terminate()
            process.join(10)
        raise
    finally:
        pool.shutdown(wait=True)


def check_address(address: str) -> str:
    """Refuse a dask scheduler address that is not ``tcp://HOST:PORT`` (or ``tls://``), at once."""
    match = _ADDRESS.match(address.strip()) if isinstance(address, str) else None
    if not match or int(match.group(3) or 0) > 65535:
        raise InputError(f"scheduler address {address!r} is not of the form tcp://HOST:PORT (such as "
                         "tcp://127.0.0.1:8786)")
    return address.strip()


def _probe(address: str, timeout: float) -> None:
    """Ask the scheduler who it is, bounded by `timeout` (a server that accepts and stays silent cannot hang us)."""
    from distributed.comm import connect

    async def identity():
        comm = await connect(address, timeout=timeout)
        try:
            await comm.write({"op": "identity"})
            return await comm.read()
        finally:
            await comm.close()

    try:
        answer = asyncio.run(asyncio.wait_for(identity(), timeout))
    except (TimeoutError, OSError) as exc:
        raise InputError(f"cannot reach the dask scheduler at {address} within {timeout:g} s"
                         f"{': ' + one_line(exc) if str(exc) else ''}") from None
    if not isinstance(answer, dict) or answer.get("type") != "Scheduler":
        raise InputError(f"{address} did not answer as a dask scheduler")


def _dask(items: list[tuple[int, Case]], scheduler: Any, timeout: float) -> Iterator[tuple[int, str, Any]]:
    try:
        import distributed
    except ImportError:
        raise InputError("a dask scheduler needs dask.distributed: pip install 'solubility[dask]'") from None
    if isinstance(scheduler, str):
        _probe(check_address(scheduler), timeout)
    elif not isinstance(scheduler, distributed.Client) and not hasattr(scheduler, "scheduler_address"):
        raise InputError("scheduler must be an address tcp://HOST:PORT, a distributed.Client or a cluster, got "
                         f"{type(scheduler).__name__}")
    own = not isinstance(scheduler, distributed.Client)
    client = distributed.Client(scheduler.strip() if isinstance(scheduler, str) else scheduler, timeout=timeout,
                                set_as_default=False) if own else scheduler
    futures: dict = {}
    try:
        futures.update({client.submit(run_case, case, pure=False): index for index, case in items})
        yield from _outcomes(futures, distributed.as_completed(list(futures), loop=client.loop))
    finally:
        client.cancel(list(futures))
        if own:
            client.close()
