"""`sweep`: run many solvus cases in parallel, store each as it finishes, return one Dataset by ``case``."""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Iterable, Mapping
from typing import Any

from solubility import errors
from solubility.errors import InputError, JobError, SolubilityError
from solubility.sweeps.assemble import assemble
from solubility.sweeps.case import Case, check_unique_names, job_sha256
from solubility.sweeps.executors import DaskExecutor, LocalPool, SerialExecutor, default_workers
from solubility.sweeps.store import CaseOutcome, Store, open_store

__all__ = ["check_databases", "sweep"]

#: progress callback: (cases done, cases in all, the case just finished, its status); called first with
#: (cases finished in the store, cases in all, None, "start")
ProgressCallback = Callable[[int, int, "Case | None", str], None]


def sweep(
    cases: Iterable[Case | Mapping[str, Any]],
    *,
    workers: int | None = None,
    scheduler: Any = None,
    store: str | os.PathLike | None = None,
    resume: bool = False,
    progress: bool | ProgressCallback | None = None,
    strict: bool = False,
    overwrite: bool = False,
):
    """Compute the solvus of many cases and gather them in one Dataset along ``case``.

    Parameters
    ----------
    cases
        `Case` objects, or mappings with the keys of a case (as in a job file's ``[[case]]`` table), or the
        list `read_job` returns. Names must be unique. Everything is validated, and every database is found,
        before any case runs.
    workers
        Local worker processes (default: as many as there are CPUs, never more than cases to run). 0 runs the
        cases one by one in this process. Not allowed together with `scheduler`.
    scheduler
        Run on dask.distributed instead: a scheduler address (``"tcp://host:8786"``), a ``distributed.Client``
        or a cluster such as ``distributed.LocalCluster``. Workers need the same databases at the same paths.
    store
        Folder where every case is written (NetCDF) as soon as it finishes, with a manifest naming the job.
    resume
        Continue the store of an interrupted run of the same job: its finished cases are read back, not run
        again (failed ones are run again).
    progress
        True: a tqdm progress bar on standard error. A callable ``f(done, total, case, status)`` is called
        once before any case runs, with ``case=None, status="start"`` and `done` the cases taken from the
        store, then after every case with the `Case` and its status. None or False: nothing.
    strict
        Stop at the first failed case and raise its error (named after the case) instead of recording it.
    overwrite
        Start the store afresh if it holds a store of another job, or of this job when not resuming (only the
        store's own files are removed).

    Returns
    -------
    xarray.Dataset
        Dims ``case`` and ``T`` (the union of the cases' temperatures, K; ``requested`` marks each case's own
        points, the others are NaN padding). Data: the variables of `solubility.solvus` (X, W, PPM, Y,
        partner, converged, reason, MU, ...) with a leading ``case`` dim. Coordinates along ``case``: its
        name, database, phase, solute, pressure (Pa), fix (JSON), exclude, status ("ok"/"failed") and error.
        Identical whichever executor ran it, and whether or not it was resumed (but for ``created``).

    Raises
    ------
    JobError
        A case is invalid, two share a name, or a database is not found (before any work).
    OutputError
        The store cannot be used (see `open_store`) or a case file cannot be written (the store stays
        resumable).
    SolubilityError
        With `strict`, the error of the first failed case, its message prefixed by the case name.
    """
    case_list = _as_cases(cases)
    if scheduler is not None and workers is not None:
        raise InputError("give workers or scheduler, not both (dask workers are set up on the cluster)")
    if resume and store is None:
        raise InputError("resume needs a store (the folder of the run to resume)")
    executor = _executor(workers, scheduler)
    check_databases(case_list)
    job = job_sha256(case_list)
    st = open_store(store, case_list, resume=resume, overwrite=overwrite) if store is not None else None
    outcomes: dict[int, CaseOutcome] = st.finished() if (st is not None and resume) else {}
    todo = [(i, c) for i, c in enumerate(case_list) if i not in outcomes]
    report = _progress(progress, len(case_list), len(outcomes))
    try:
        _run(executor, todo, case_list, outcomes, st, report, strict)
    finally:
        report.close()
    return assemble(case_list, outcomes, job)


def _run(executor, todo, cases, outcomes, st: Store | None, report, strict: bool) -> None:
    results = executor.run(todo)
    try:
        for index, outcome in results:
            if st is not None:
                st.write(index, outcome)
            outcomes[index] = outcome
            report.update(cases[index], outcome.status)
            if strict and not outcome.ok:
                raise _case_error(cases[index], outcome.error)
    finally:
        close = getattr(results, "close", None)
        if close is not None:
            close()


def _as_cases(cases: Iterable[Case | Mapping[str, Any]]) -> list[Case]:
    if isinstance(cases, Case | Mapping | str):
        raise JobError(
            "cases must be a list of Case objects or of mappings; for a job file use read_job(path)"
        )
    out = []
    for i, case in enumerate(cases, start=1):
        if isinstance(case, Case):
            out.append(case)
        elif isinstance(case, Mapping):
            out.append(Case.from_mapping(case, f"case {i}"))
        else:
            raise JobError(f"case {i}: expected a Case or a mapping, got {type(case).__name__}")
    if not out:
        raise JobError("no cases to run")
    check_unique_names(out, [f"case {i} ({c.name!r})" for i, c in enumerate(out, start=1)])
    return out


def check_databases(cases: list[Case]) -> None:
    """Check every case against its database before any work: the file or bundled name, phases, elements.

    Each database is read once (`solubility.databases.reader.load_database`, cached per process).

    Raises
    ------
    JobError
        Naming the case and the key: a database that is neither a file nor a bundled name or cannot be read,
        a phase (host or excluded) or element (solute, fixed, balance) that the database lacks, a host phase
        without an interstitial sublattice for the solute, or fixed contents outside (0, 1).
    """
    from solubility.calc.inputs import check_fix, host_elements
    from solubility.databases.reader import check_elements, check_phases, load_database

    loaded: dict[str, Any] = {}
    for case in cases:
        where = f"case {case.name!r}"
        try:
            if case.database not in loaded:
                loaded[case.database] = load_database(case.database)
        except SolubilityError as exc:
            raise JobError(f"{where}: key 'database': {exc}") from None
        ldb = loaded[case.database]
        checks: list[tuple[str, Callable, list[str]]] = [
            ("phase", check_phases, [case.phase]),
            ("exclude", check_phases, list(case.exclude)),
            ("solute", check_elements, [case.solute]),
            ("fix", check_elements, [el for el, _ in case.fix]),
            ("balance", check_elements, [case.balance] if case.balance else []),
        ]
        for key, check, names in checks:
            try:
                if names:
                    check(ldb, names)
            except SolubilityError as exc:
                raise JobError(f"{where}: key {key!r}: {exc}") from None
        try:  # the host must be (hosts)a(X,VA)c over the case's elements, with valid fixed contents
            host_elements(ldb, case.phase, case.solute, check_fix(dict(case.fix)), case.balance)
        except SolubilityError as exc:
            raise JobError(f"{where}: {exc}") from None


def _executor(workers: int | None, scheduler: Any):
    if scheduler is not None:
        return DaskExecutor(scheduler)
    if workers is None:
        workers = default_workers()
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 0:
        raise InputError(f"workers must be a whole number >= 0 (0: run in this process), got {workers!r}")
    if workers == 0:
        return SerialExecutor()
    return LocalPool(workers)


def _case_error(case: Case, message: str) -> SolubilityError:
    """The error of a failed case as the tool's own exception type when it was one, else SolubilityError."""
    kind, _, text = message.partition(": ")
    cls = getattr(errors, kind, None)
    if isinstance(cls, type) and issubclass(cls, SolubilityError):
        return cls(f"case {case.name!r}: {text}")
    return SolubilityError(f"case {case.name!r} failed: {message}")


class _Progress:
    """Progress reporting: a tqdm bar, a callback, or nothing."""

    def __init__(
        self, total: int, done: int, bar: Any = None, callback: ProgressCallback | None = None
    ) -> None:
        self.total, self.done, self.bar, self.callback = total, done, bar, callback
        if callback is not None:
            callback(done, total, None, "start")

    def update(self, case: Case, status: str) -> None:
        self.done += 1
        if self.bar is not None:
            self.bar.set_postfix_str(f"{case.name}: {status}", refresh=False)
            self.bar.update(1)
        if self.callback is not None:
            self.callback(self.done, self.total, case, status)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _progress(progress: bool | ProgressCallback | None, total: int, done: int) -> _Progress:
    if progress is None or progress is False:
        return _Progress(total, done)
    if progress is True:
        from tqdm import tqdm

        bar = tqdm(total=total, initial=done, unit="case", file=sys.stderr, dynamic_ncols=True, desc="sweep")
        return _Progress(total, done, bar=bar)
    if callable(progress):
        return _Progress(total, done, callback=progress)
    raise InputError(f"progress must be True, False, None or a callable, got {type(progress).__name__}")
