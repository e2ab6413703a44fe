"""Run the solvus (and uptake) cases of a TOML job file in parallel, resumably, into one table.

JOB.toml holds [[case]] tables (name, database, phase, solute, temperatures "START:STOP:STEP" or a list in K,
and optionally exclude, fix, balance, pressure; kind = "uptake" with one of activity, partial_pressure or
atmosphere for an uptake case), an optional [defaults] table and [[product]] tables whose
[product.vary] lists are expanded as a cartesian product. The whole file is checked before any work.

Cases run on local worker processes (--workers, default: one per CPU) or on a dask.distributed cluster
(--scheduler ADDRESS). With --store DIR each finished case is written to DIR at once; after an interruption,
the same command with --resume runs only the cases not yet finished. A progress bar is shown on standard error
when it is a terminal (not with --quiet), and a summary at the end. Exit status: 0 when every case succeeded,
1 when some failed (their results are NaN with the message), 2 on an error, 130 on Ctrl-C and 143 on SIGTERM
(workers stopped, temporary files removed, finished cases kept in the store).
"""

from __future__ import annotations

import argparse
import os
import sys
import time


def _workers(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"{text!r} must be 0 (run in this process) or more")
    return value


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``solubility sweep``."""
    parser.add_argument("job", metavar="JOB.toml", help="TOML job file")
    where = parser.add_mutually_exclusive_group()
    where.add_argument(
        "--workers", type=_workers, metavar="N", help="local worker processes (default: one per CPU; 0: none)"
    )
    where.add_argument("--scheduler", metavar="ADDRESS", help="run on the dask scheduler at ADDRESS")
    parser.add_argument("--connect-timeout", type=float, default=10.0, metavar="S",
                        help="seconds to wait for the dask scheduler to answer (default 10)")
    parser.add_argument("--store", metavar="DIR", help="write every finished case to folder DIR at once")
    parser.add_argument("--resume", action="store_true", help="keep finished cases of --store, run the rest")
    parser.add_argument(
        "--overwrite",
        action="store_true",
        help="replace existing output files; start --store afresh if it holds another job (or, without"
        " --resume, this one)",
    )
    parser.add_argument("--strict", action="store_true", help="stop at the first failed case (exit status 2)")
    parser.add_argument("--netcdf", metavar="F", help="write the sweep Dataset to NetCDF file F")
    parser.add_argument("--csv", metavar="F", help="write one row per case and temperature to CSV file F")
    parser.add_argument("--json", action="store_true", help='print one JSON object: {"cases": [...]}')
    parser.add_argument("--quiet", action="store_true", help="no progress bar and no summary")


def _table(ds) -> str:
    """One line per case: name, status, points, converged points, partner phases, error."""
    rows = [("case", "status", "points", "converged", "partners", "error")]
    for i, name in enumerate(ds["case"].values.tolist()):
        asked = ds["requested"].values[i]
        converged = int(ds["converged"].values[i][asked].sum()) if "converged" in ds else 0
        if "kind" in ds.coords and ds["kind"].values[i] == "uptake":  # as `solubility uptake --json` counts them
            converged = sum(s in ("ok", "metastable", "below_limit") for s in ds["status"].values[i][asked].tolist())
        has_partner = "partner" in ds
        partners = sorted({p for p in ds["partner"].values[i][asked].tolist() if p}) if has_partner else []
        rows.append(
            (name, str(ds["case_status"].values[i]), str(int(asked.sum())), str(converged),
             ",".join(partners) or "-", str(ds["case_error"].values[i]) or "-")
        )  # fmt: skip
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]) - 1)]
    return "\n".join(
        "  ".join([*(c.ljust(w) for c, w in zip(r[:-1], widths, strict=True)), r[-1]]).rstrip() for r in rows
    )


def _summary(ds, seconds: float, resumed: int) -> str:
    status = ds["case_status"].values.tolist()
    ok = status.count("ok")
    text = f"sweep: {len(status)} cases, {ok} ok, {len(status) - ok} failed"
    if resumed:
        text += f" ({resumed} from the store)"
    return f"{text}, {seconds:.1f} s"


def run(args: argparse.Namespace) -> int:
    """Read the job, run the sweep, write the outputs; 1 if a case failed."""
    from pathlib import Path

    from solubility._io import atomic_outputs, check_output_path
    from solubility.cli.commands._common import emit_json
    from solubility.errors import InputError, Terminated
    from solubility.sweeps import read_job, sweep, sweep_json
    from solubility.sweeps.run import Progress, check_address

    if args.resume and not args.store:
        raise InputError("--resume needs --store DIR (the folder of the run to resume)")
    if not args.connect_timeout > 0 or args.connect_timeout > 3600:
        raise InputError(f"--connect-timeout {args.connect_timeout:g} is outside (0, 3600] s")
    outputs = [(o, p, w) for o, p, w in (("--netcdf", args.netcdf, _netcdf), ("--csv", args.csv, _csv)) if p]
    _check_outputs_are_not_inputs(args, outputs, [])  # the job file first: with --overwrite it would be lost
    for _, path, _ in outputs:
        check_output_path(path, overwrite=args.overwrite)
    cases = read_job(args.job)
    _check_outputs_are_not_inputs(args, outputs, cases)
    if args.scheduler is not None:
        check_address(args.scheduler)
    started = time.perf_counter()
    counter = Progress(bar=not args.quiet and sys.stderr.isatty())
    try:  # SIGTERM raises Terminated, a KeyboardInterrupt (`solubility.cli.main` sets the handler)
        ds = sweep(cases, workers=args.workers, scheduler=args.scheduler, store=args.store, resume=args.resume,
                   progress=counter, strict=args.strict, overwrite=args.overwrite,
                   connect_timeout=args.connect_timeout)
        with atomic_outputs() as files:  # all outputs or none
            for _, path, encode in outputs:
                data = encode(ds)
                files.write(path, lambda tmp, data=data: Path(tmp).write_bytes(data))
    except KeyboardInterrupt as exc:
        counter.close()
        kept = f"; {counter.done} finished cases are in the store, rerun with --resume" if args.store else ""
        term = isinstance(exc, Terminated)
        print(f"error: sweep stopped by {'SIGTERM' if term else 'Ctrl-C'}: workers stopped, temporary files "
              f"removed, no output file written{kept}", file=sys.stderr)
        return 143 if term else 130
    finally:
        counter.close()
    if args.json:
        emit_json(sweep_json(ds))
    else:
        print(_table(ds))
    if not args.quiet:
        resumed = len(cases) - counter.ran
        print(_summary(ds, time.perf_counter() - started, resumed), file=sys.stderr)
    return 0 if all(s == "ok" for s in ds["case_status"].values.tolist()) else 1


def _netcdf(ds) -> bytes:
    return bytes(ds.to_netcdf(engine="h5netcdf"))  # in memory: a full disk fails cleanly in the write


def _csv(ds) -> bytes:
    from solubility.sweeps import csv_text

    return csv_text(ds).encode("utf-8")


def _check_outputs_are_not_inputs(args: argparse.Namespace, outputs: list, cases) -> None:
    """Refuse, before any work, an output that is the job file, a database of a case, or another output."""
    from solubility.errors import InputError

    inputs = {os.path.realpath(args.job): f"the job file {args.job}"}
    for case in (c for c in cases if os.path.isfile(c.database)):
        inputs.setdefault(os.path.realpath(case.database), f"the database of case {case.name!r}")
    seen: dict[str, str] = {}
    for option, path, _ in outputs:
        real = os.path.realpath(path)
        if real in inputs:
            raise InputError(f"{option} {path!r} is {inputs[real]}; give another output file")
        if real in seen:
            raise InputError(f"{option} {path!r} is the same file as {seen[real]}; give two different files")
        seen[real] = option
    if args.store:
        store = os.path.realpath(args.store)
        for real, what in [*inputs.items(), *((r, o) for r, o in seen.items())]:
            if real == store or real.startswith(store + os.sep):
                raise InputError(f"--store {args.store!r} holds {what}; give a folder of its own")
