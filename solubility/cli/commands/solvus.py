"""Terminal solubility of an interstitial solute in a host phase against temperature (the exact solvus).

At every temperature the coexisting phase is found among all phases of the database that can form (less those
given with --exclude), and the boundary is solved exactly with it at zero amount. Prints a table, or one JSON
object with --json; writes CSV, NetCDF and a figure on request (never over an existing file unless
--overwrite).

Exit status: 0 when the line holds at least one number; 3 when no point of the line has a number (every point
host_unstable, below_limit, no_partner or failed: the table and the CSV/NetCDF/JSON outputs still say why, but
no figure is written); 2 for bad input; 4 when an output cannot be written (e.g. a full disk).

Results are only as good as the database: verify them against measurements; applicable codes and qualified
engineering practice take precedence.

example:
  solubility solvus fe-c --phase BCC_A2 --solute C --temperatures 500:1000:25 --exclude GRAPHITE,DIAMOND_A4
  solubility solvus fe-c --phase FCC_A1 --solute C --temperatures -10:100:10 --celsius --json
"""

from __future__ import annotations

import argparse
import math
import sys

from solubility.cli.commands._common import emit_json
from solubility.constants import ZERO_CELSIUS
from solubility.errors import InputError


def _fix_item(text: str) -> tuple[str, str]:
    if "=" not in text:
        raise argparse.ArgumentTypeError(f"--fix {text!r} is not EL=U, e.g. CR=0.02")
    el, value = text.split("=", 1)
    if not el.strip():
        raise argparse.ArgumentTypeError(f"--fix {text!r} names no element; give EL=U, e.g. CR=0.02")
    return el.strip().upper(), value.strip()


def _names(text: str) -> list[str]:
    names = [n.strip() for n in text.split(",")]
    if not all(names):
        raise argparse.ArgumentTypeError(f"--exclude {text!r} holds an empty name; give --exclude A,B")
    return names


def _label_item(text: str) -> tuple[str, str]:
    if "=" not in text or not text.split("=", 1)[0].strip() or not text.split("=", 1)[1].strip():
        raise argparse.ArgumentTypeError(f"--label {text!r} is not PHASE=NAME, e.g. BCC_A2=ferrite")
    phase, name = text.split("=", 1)
    return phase.strip().upper(), name.strip()


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("database", metavar="DATABASE", help="TDB file or bundled name (see 'solubility databases')")
    parser.add_argument("--phase", required=True, help="host phase, e.g. BCC_A2")
    parser.add_argument("--solute", required=True, help="interstitial solute element, e.g. C")
    parser.add_argument("--temperatures", required=True, metavar="START:STOP:STEP",
                        help="START:STOP:STEP (STOP included) or a comma-separated list, K (C with --celsius)")
    parser.add_argument("--celsius", action="store_true", help="temperatures are given in degrees Celsius")
    parser.add_argument("--exclude", action="append", default=[], type=_names, metavar="PHASE[,PHASE...]",
                        help="phases that may not appear: --exclude A,B or --exclude A --exclude B")
    parser.add_argument("--fix", action="append", default=[], type=_fix_item, metavar="EL=U",
                        help="u-fraction of another host element, e.g. CR=0.02 (repeatable)")
    parser.add_argument("--balance", metavar="EL", help="balance element of the host (when not evident)")
    parser.add_argument("--pressure", default="101325", metavar="PA", help="pressure, Pa (default 101325)")
    parser.add_argument("--csv", metavar="FILE", help="write the table as CSV")
    parser.add_argument("--netcdf", metavar="FILE", help="write the Dataset as NetCDF")
    parser.add_argument("--plot", metavar="FILE", help="write a figure (.png, .pdf or .svg)")
    parser.add_argument("--plot-units", default="wt%", choices=["wt%", "at%", "ppm", "x"],
                        help="composition unit of the figure (default wt%%)")
    parser.add_argument("--plot-temperature", default="C", choices=["C", "K"],
                        help="temperature unit of the figure (default C)")
    parser.add_argument("--label", action="append", default=[], type=_label_item, metavar="PHASE=NAME",
                        help="display name of a phase on the figure, e.g. BCC_A2=ferrite (repeatable)")
    parser.add_argument("--fit-range", metavar="TMIN:TMAX",
                        help="temperatures of the Arrhenius fit, K (C with --celsius); their points must share "
                             "one partner (default: the longest run with one partner)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.add_argument("--overwrite", action="store_true", help="replace existing output files")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of the table")


def _fix_map(items: list[tuple[str, str]]) -> dict[str, float]:
    fix: dict[str, float] = {}
    for el, value in items:
        try:
            u = float(value)
        except ValueError:
            raise InputError(f"--fix {el}={value!r} is not a number; give a u-fraction in (0, 1)") from None
        if el in fix:
            raise InputError(f"--fix names {el} twice")
        fix[el] = u
    return fix


def _outputs(args) -> list[tuple[str, str]]:
    """The requested outputs, checked before any work (real paths; never the database; never one file twice)."""
    from solubility._io import check_outputs
    from solubility.databases.reader import database_path

    outs = [(kind, path) for kind, path in (("csv", args.csv), ("netcdf", args.netcdf), ("plot", args.plot))
            if path]
    if args.plot and not args.plot.lower().endswith((".png", ".pdf", ".svg")):
        raise InputError(f"--plot {args.plot!r} must end in .png, .pdf or .svg")
    database = database_path(args.database)
    check_outputs([path for _, path in outs], inputs=[database] if database is not None else [],
                  overwrite=args.overwrite)
    return outs


def _fit_range(args) -> tuple[float, float] | None:
    if args.fit_range is None:
        return None
    parts = args.fit_range.split(":")
    try:
        lo, hi = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"--fit-range {args.fit_range!r} is not TMIN:TMAX, e.g. --fit-range 600:900") from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo >= hi:
        raise InputError(f"--fit-range {args.fit_range!r} needs finite TMIN < TMAX, e.g. --fit-range 600:900")
    shift = ZERO_CELSIUS if args.celsius else 0.0
    return lo + shift, hi + shift


def _compute(args, pressure: float):
    """The solvus Dataset, with a progress bar on standard error when the line takes a while."""
    from solubility.api import solvus
    from solubility.calc.inputs import parse_temperatures

    T = parse_temperatures(args.temperatures, celsius=args.celsius)
    exclude = [name for group in args.exclude for name in group]
    bar = None
    if not args.quiet and sys.stderr.isatty() and T.size > 1:
        from tqdm import tqdm

        # shown only once the line has taken a second, so quick lines stay quiet
        bar = tqdm(total=T.size, unit="T", desc="solvus", file=sys.stderr, delay=1.0, leave=False)
    try:
        return solvus(args.database, args.phase, args.solute, T, exclude=exclude, fix=_fix_map(args.fix),
                      pressure=pressure, balance=args.balance,
                      progress=None if bar is None else (lambda _T: bar.update(1)))
    finally:
        if bar is not None:
            bar.close()


def run(args: argparse.Namespace) -> int:
    import io
    from pathlib import Path

    from solubility._io import atomic_outputs
    from solubility.results.dataset import csv_text, netcdf_bytes, solvus_json
    from solubility.results.summary import add_summary
    from solubility.results.table import solvus_table

    try:
        pressure = float(args.pressure)
    except ValueError:
        raise InputError(f"--pressure {args.pressure!r} is not a number of Pa") from None
    outs = _outputs(args)
    fit_range = _fit_range(args)
    labels = dict(args.label)
    ds = _compute(args, pressure)
    if fit_range is not None:
        ds = add_summary(ds, fit_range)
    empty = not bool((ds["status"].values == "ok").any())
    written = []
    with atomic_outputs() as files:  # all outputs or none
        for kind, path in outs:
            if kind == "csv":
                files.write_text(path, csv_text(ds))
            elif kind == "netcdf":
                data = netcdf_bytes(ds)
                files.write(path, lambda tmp, data=data: Path(tmp).write_bytes(data))
            elif not empty:
                from solubility.results.plotting import pyplot, solvus_figure

                fig = solvus_figure(ds, units=args.plot_units, temperature=args.plot_temperature,
                                    T_range=fit_range, labels=labels)
                image = io.BytesIO()
                try:
                    fig.savefig(image, format=Path(path).suffix.lower().lstrip("."), dpi=150, bbox_inches="tight")
                finally:
                    fig.clf()
                    pyplot().close(fig)
                png = image.getvalue()
                files.write(path, lambda tmp, data=png: Path(tmp).write_bytes(data))
            else:
                continue
            written.append((kind, path))
    if args.json:
        emit_json(solvus_json(ds))
    else:
        print(solvus_table(ds))
        for kind, path in written:
            print(f"wrote {kind}: {path}", file=sys.stderr)
    if empty:
        states = ", ".join(sorted({str(s) for s in ds["status"].values}))
        note = "; no figure written" if args.plot else ""
        print(f"error: no point of the line has a number (status {states}){note}", file=sys.stderr)
        return 3
    return 0
