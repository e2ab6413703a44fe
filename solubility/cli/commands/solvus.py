"""Terminal solubility of an interstitial solute in a host phase against temperature (the exact solvus).

At every temperature the coexisting phase is found among all phases of the database that can form (less those
given with --exclude), and the boundary is solved exactly with it at zero amount. Prints a table, or one JSON
object with --json; writes CSV, NetCDF and a figure on request (never over an existing file unless
--overwrite).

Results are only as good as the database: verify them against measurements; applicable codes and qualified
engineering practice take precedence.

example:
  solubility solvus fe-c --phase BCC_A2 --solute C --temperatures 500:1000:25 --exclude GRAPHITE DIAMOND_A4
"""

from __future__ import annotations

import argparse
import math
import sys

from solubility.cli.commands._common import emit_json
from solubility.errors import InputError


def _fix_item(text: str) -> tuple[str, str]:
    if "=" not in text:
        raise argparse.ArgumentTypeError(f"--fix {text!r} is not EL=U, e.g. CR=0.02")
    el, value = text.split("=", 1)
    if not el.strip():
        raise argparse.ArgumentTypeError(f"--fix {text!r} names no element; give EL=U, e.g. CR=0.02")
    return el.strip().upper(), value.strip()


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("database", metavar="DATABASE", help="TDB file or bundled name (see 'solubility databases')")
    parser.add_argument("--phase", required=True, help="host phase, e.g. BCC_A2")
    parser.add_argument("--solute", required=True, help="interstitial solute element, e.g. C")
    parser.add_argument("--temperatures", required=True, metavar="START:STOP:STEP",
                        help="START:STOP:STEP (STOP included) or a comma-separated list, K (C with --celsius)")
    parser.add_argument("--celsius", action="store_true", help="temperatures are given in degrees Celsius")
    parser.add_argument("--exclude", nargs="+", action="extend", default=[], metavar="PHASE",
                        help="phases that may not appear (repeatable)")
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
    from solubility._io import check_output_path

    outs = [(kind, path) for kind, path in (("csv", args.csv), ("netcdf", args.netcdf), ("plot", args.plot))
            if path]
    if len({path for _, path in outs}) != len(outs):
        raise InputError("--csv, --netcdf and --plot must name different files")
    for _, path in outs:
        check_output_path(path, overwrite=args.overwrite)
    if args.plot and not args.plot.lower().endswith((".png", ".pdf", ".svg")):
        raise InputError(f"--plot {args.plot!r} must end in .png, .pdf or .svg")
    return outs


def _table(ds) -> str:
    solute, phase = ds.attrs["solute"], ds.attrs["phase"]
    lines = [f"solvus of {solute} in {phase}  (database {ds.attrs['database']}, sha256 "
             f"{ds.attrs['database_sha256'][:12]}...)",
             f"{'T/K':>9} {'T/C':>8} {'x':>12} {'wt%':>11} {'ppm':>11} {'y':>11}  partner / note"]
    for i in range(ds.sizes["T"]):
        T = float(ds["T"].values[i])
        if ds["status"].values[i] == "ok":
            lines.append(f"{T:9.2f} {T - 273.15:8.2f} {ds['X'].values[i]:12.5e} {100 * ds['W'].values[i]:11.5e} "
                         f"{ds['PPM'].values[i]:11.4g} {ds['Y'].values[i]:11.5e}  {ds['partner'].values[i]}")
        else:
            lines.append(f"{T:9.2f} {T - 273.15:8.2f} {'-':>12} {'-':>11} {'-':>11} {'-':>11}  "
                         f"[{ds['status'].values[i]}] {ds['reason'].values[i]}")
    for Tc, below, above in zip(ds["partner_change_T"].values, ds["partner_below"].values,
                                ds["partner_above"].values, strict=True):
        where = f"{Tc:.2f} K ({Tc - 273.15:.2f} C)" if math.isfinite(float(Tc)) else "an unlocated temperature"
        lines.append(f"partner changes at {where}: {below} below, {above} above")
    lines.append("Results are only as good as the database; verify against measurements. Applicable codes and "
                 "qualified engineering practice take precedence.")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    from solubility import solvus
    from solubility.results.dataset import solvus_json, write_csv, write_netcdf

    try:
        pressure = float(args.pressure)
    except ValueError:
        raise InputError(f"--pressure {args.pressure!r} is not a number of Pa") from None
    outs = _outputs(args)
    ds = solvus(args.database, args.phase, args.solute, args.temperatures, exclude=args.exclude,
                fix=_fix_map(args.fix), pressure=pressure, balance=args.balance, celsius=args.celsius)
    for kind, path in outs:
        if kind == "csv":
            write_csv(ds, path)
        elif kind == "netcdf":
            write_netcdf(ds, path)
        else:
            from solubility.results.plotting import save_solvus_figure

            save_solvus_figure(ds, path, units=args.plot_units, temperature=args.plot_temperature)
    if args.json:
        emit_json(solvus_json(ds))
    else:
        print(_table(ds))
        for kind, path in outs:
            print(f"wrote {kind}: {path}", file=sys.stderr)
    return 0
