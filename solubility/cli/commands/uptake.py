"""Solute content of a host phase in equilibrium with its surroundings (an activity, a gas, an atmosphere).

Give exactly one of --activity (against --reference, by default the element's reference state: graphite for C,
1/2 N2, 1/2 H2, 1/2 O2 gas at 1 bar), --partial-pressure (Pa of the pure diatomic gas H2, N2 or O2; Sieverts'
law) or --atmosphere (partial pressures of a gas mixture, Pa: NH3 and H2 for nitriding, with the nitriding
potential K_N = p(NH3) / p(H2)^1.5 in atm^-1/2; CO and CO2, or CH4 and H2, for carburising; H2O and H2 for
oxygen). The mixture is taken as given unless --equilibrate-gas. Every other phase is checked at the host's
potentials: "metastable" names what forms instead (the host still gets its number).

Results are only as good as the database: verify them against measurements; applicable codes and qualified
engineering practice take precedence.

examples:
  solubility uptake fe-c --phase FCC_A1 --solute C --temperatures 1100:1300:50 --activity 0.5
  solubility uptake steel --phase BCC_A2 --solute N --temperatures 773:873:25 --atmosphere NH3=0.3e5,H2=0.7e5
  solubility uptake steel --phase BCC_A2 --solute N --balance FE --temperatures 723:973:25 \\
      --atmosphere NH3=0.3e5,H2=0.7e5 --map nitriding-map.png --map-phases FCC_A1,FE4N_LP10,HCP_A3
"""

from __future__ import annotations

import argparse
import math
import sys

from solubility.cli.commands._common import emit_json
from solubility.cli.commands.solvus import _fix_item, _fix_map, _names, _outputs
from solubility.constants import ZERO_CELSIUS
from solubility.errors import InputError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("database", metavar="DATABASE", help="TDB file or bundled name (see 'solubility databases')")
    parser.add_argument("--phase", required=True, help="host phase, e.g. FCC_A1")
    parser.add_argument("--solute", required=True, help="interstitial solute element, e.g. N")
    parser.add_argument("--temperatures", required=True, metavar="START:STOP:STEP",
                        help="START:STOP:STEP (STOP included) or a comma-separated list, K (C with --celsius)")
    parser.add_argument("--celsius", action="store_true", help="temperatures are given in degrees Celsius")
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--activity", metavar="A", help="activity of the solute against --reference (> 0)")
    what.add_argument("--partial-pressure", metavar="PA", help="partial pressure of the diatomic gas X2, Pa")
    what.add_argument("--atmosphere", metavar="SPEC", help="gas mixture SPECIES=PA,..., e.g. NH3=0.3e5,H2=0.7e5")
    parser.add_argument("--reference", metavar="PHASE",
                        help="reference phase of --activity (default: the element's reference state)")
    parser.add_argument("--equilibrate-gas", action="store_true",
                        help="bring the --atmosphere to gas equilibrium first (default: taken as given)")
    parser.add_argument("--sieverts-range", metavar="TMIN:TMAX",
                        help="temperatures (K) of the Sieverts enthalpy fit (default: all ok points)")
    parser.add_argument("--exclude", action="append", default=[], type=_names, metavar="PHASE[,PHASE...]",
                        help="phases that may not appear: --exclude A,B or --exclude A --exclude B")
    parser.add_argument("--fix", action="append", default=[], type=_fix_item, metavar="EL=U",
                        help="u-fraction of another host element, e.g. CR=0.02 (repeatable)")
    parser.add_argument("--balance", metavar="EL", help="balance element of the host (when not evident)")
    parser.add_argument("--pressure", default="101325", metavar="PA", help="total pressure on the host, Pa")
    parser.add_argument("--csv", metavar="FILE", help="write the table as CSV")
    parser.add_argument("--netcdf", metavar="FILE", help="write the Dataset as NetCDF")
    parser.add_argument("--plot", metavar="FILE", help="write a figure of content against temperature")
    parser.add_argument("--plot-units", default="wt%", choices=["wt%", "at%", "ppm", "x"],
                        help="composition unit of the figure (default wt%%)")
    parser.add_argument("--plot-temperature", default="C", choices=["C", "K"],
                        help="temperature unit of the figure (default C)")
    parser.add_argument("--map", metavar="FILE",
                        help="also write the map of the stable phase at the surface against the potential and "
                             "temperature (exact boundaries; .png, .pdf or .svg), with this line drawn across it")
    parser.add_argument("--map-phases", type=_names, default=[], metavar="PHASE[,PHASE...]",
                        help="further phases of the map, e.g. FCC_A1,FE4N_LP10,HCP_A3 (default: the host alone)")
    parser.add_argument("--map-range", metavar="LOW:HIGH",
                        help="range of the map's axis: K_N (atm^-1/2) for N, p(X2) (Pa) for H and O, else activity")
    parser.add_argument("--overwrite", action="store_true", help="replace existing output files")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def _range(text: str | None, option: str = "--sieverts-range", what: str = "TMIN:TMAX in K"):
    if text is None:
        return None
    parts = text.split(":")
    try:
        lo, hi = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"{option} {text!r} is not {what}") from None
    return lo, hi


class _Bar:
    """A progress bar on standard error for long lines (only on a terminal, not with --quiet)."""

    def __init__(self, args, count: int, desc: str) -> None:
        self.bar = None
        if not args.quiet and sys.stderr.isatty() and count > 1:
            from tqdm import tqdm

            # shown only once the line has taken a second, so quick lines stay quiet
            self.bar = tqdm(total=count, unit="T", desc=desc, file=sys.stderr, delay=1.0, leave=False)

    def __call__(self, _T: float) -> None:
        if self.bar is not None:
            self.bar.update(1)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _table(ds) -> str:
    import numpy as np

    from solubility.results.table import column

    a = ds.attrs
    lines = [f"uptake of {a['solute']} by {a['phase']} from {a['surroundings_value']}  (database {a['database']}, "
             f"sha256 {a['database_sha256'][:12]}...)",
             f"activity against {a['reference']}; gas data: {a['gas_data_source']}"]
    if a.get("reaction"):
        lines.append(f"reaction {a['reaction']}")
    extra = "derived" if "derived" in ds else ("KS_CM3" if "KS_CM3" in ds else None)
    name = ds["derived"].attrs["long_name"] if "derived" in ds else ""
    short = "K_N/atm^-.5" if "K_N" in name else "a_C" if "carbon activity" in name else name.split(",")[0][:12]
    head = {"derived": short, "KS_CM3": "K_S cm3/100g/atm^.5"}.get(extra, "")
    has = np.isin(ds["status"].values, ("ok", "metastable"))
    cols = {k: column(np.where(has, v, np.nan)) for k, v in (("x", ds["X"].values), ("wt%", 100 * ds["W"].values),
                                                            ("ppm", ds["PPM"].values))}
    cols["activity"] = column(ds["activity"].values)
    cols["extra"] = column(ds[extra].values) if extra else [""] * ds.sizes["T"]
    width = {k: max(len(k), *(len(s) for s in v)) for k, v in cols.items() if k != "extra"}
    width["extra"] = max(len(head), *(len(s) for s in cols["extra"])) if extra else 0
    lines.append(f"{'T/K':>9} {'T/C':>8} " + " ".join(f"{k:>{width[k]}}" for k in ("x", "wt%", "ppm", "activity"))
                 + (f" {head:>{width['extra']}}" if extra else "") + "  status / note")
    for i in range(ds.sizes["T"]):
        T, st = float(ds["T"].values[i]), str(ds["status"].values[i])
        row = " ".join(f"{cols[k][i]:>{width[k]}}" for k in ("x", "wt%", "ppm", "activity"))
        row += f" {cols['extra'][i]:>{width['extra']}}" if extra else ""
        if st == "ok":
            note = "ok"
        elif st == "metastable":
            note = f"[metastable] {ds['forms_instead'].values[i].replace('+', ', ')} forms"
        else:
            note = f"[{st}] {ds['reason'].values[i]}"
        lines.append(f"{T:9.2f} {T - ZERO_CELSIUS:8.2f} {row}  {note}")
    if "sieverts_enthalpy_J_per_mol" in a and math.isfinite(float(a["sieverts_enthalpy_J_per_mol"])):
        lines.append(f"apparent enthalpy of solution (1/2 {a['solute']}2 -> {a['solute']}): "
                     f"{a['sieverts_enthalpy_J_per_mol'] / 1000:.2f} kJ/mol over {a['sieverts_fit_range_K']} "
                     f"({a['sieverts_fit_points']} points)")
    lines.append("Results are only as good as the database; verify against measurements. Applicable codes and "
                 "qualified engineering practice take precedence.")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    import numpy as np

    from solubility import surface_map, uptake
    from solubility._io import atomic_outputs
    from solubility.calc.inputs import parse_temperatures
    from solubility.results.dataset import netcdf_bytes
    from solubility.results.uptake_dataset import uptake_csv_text, uptake_json

    try:
        pressure = float(args.pressure)
    except ValueError:
        raise InputError(f"--pressure {args.pressure!r} is not a number of Pa") from None
    outs = _outputs(args)
    if args.map:
        from solubility._io import check_outputs

        if not args.map.lower().endswith((".png", ".pdf", ".svg")):
            raise InputError(f"--map {args.map!r} must end in .png, .pdf or .svg")
        if any(Path(args.map).resolve() == Path(p).resolve() for _, p in outs):
            raise InputError(f"--map {args.map!r} is also another output")
        check_outputs([args.map], inputs=[], overwrite=args.overwrite)
    map_range = _range(args.map_range, "--map-range", "LOW:HIGH (two positive numbers)")
    T = parse_temperatures(args.temperatures, celsius=args.celsius)
    exclude = [n for group in args.exclude for n in group]
    bar = _Bar(args, T.size * (2 if args.map else 1), "uptake")
    try:
        ds = uptake(args.database, args.phase, args.solute, T, activity=args.activity,
                    reference=args.reference, partial_pressure=args.partial_pressure, atmosphere=args.atmosphere,
                    equilibrate_gas=args.equilibrate_gas, exclude=exclude, fix=_fix_map(args.fix),
                    pressure=pressure, balance=args.balance, sieverts_range=_range(args.sieverts_range),
                    progress=bar)
        surface = None
        if args.map:
            import warnings

            with warnings.catch_warnings():  # the database's notes were given once, for the uptake line
                warnings.simplefilter("ignore", UserWarning)
                surface = surface_map(args.database, args.phase, args.solute, T, phases=args.map_phases,
                                      limits=map_range, exclude=exclude, fix=_fix_map(args.fix),
                                      pressure=pressure, balance=args.balance, progress=bar)
    finally:
        bar.close()
    if surface is not None:
        from solubility.results.uptake_plots import surface_figure_bytes

        outs.append(("map", args.map))
        map_image = surface_figure_bytes(surface, Path(args.map).suffix.lower().lstrip("."),
                                         temperature=args.plot_temperature, lines=[ds])
    empty = not bool(np.isin(ds["status"].values, ("ok", "metastable")).any())
    with atomic_outputs() as files:  # all outputs or none
        for kind, path in outs:
            if kind == "plot" and empty:
                continue  # nothing to draw: said below, exit status 3
            if kind == "csv":
                files.write_text(path, uptake_csv_text(ds))
            elif kind == "netcdf":
                data = netcdf_bytes(ds)
                files.write(path, lambda tmp, data=data: Path(tmp).write_bytes(data))
            elif kind == "map":
                files.write(path, lambda tmp, data=map_image: Path(tmp).write_bytes(data))
            else:
                from solubility.results.uptake_plots import uptake_figure_bytes

                image = uptake_figure_bytes(ds, Path(path).suffix.lower().lstrip("."), units=args.plot_units,
                                            temperature=args.plot_temperature)
                files.write(path, lambda tmp, data=image: Path(tmp).write_bytes(data))
    if args.json:
        emit_json(uptake_json(ds))
    else:
        print(_table(ds))
        for kind, path in outs:
            if not (kind == "plot" and empty):
                print(f"wrote {kind}: {path}", file=sys.stderr)
    if empty:
        states = ", ".join(sorted({str(s) for s in ds["status"].values}))
        note = "; no figure written" if args.plot else ""
        print(f"error: no point of the line has a number (status {states}){note}", file=sys.stderr)
        return 3
    return 0
