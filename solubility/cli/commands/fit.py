"""Fit free parameters of a model to measured solubility (least squares in ln x, the exact solvus as model).

DATA.csv columns: T_K; one of x, wt_percent, ppm; optional partner, sigma_rel (relative standard uncertainty),
source. Points against a gas (p_Pa) or at an activity need the uptake calculation and are refused for now.
Every name in EXPR that is no FUNCTION of the database is fitted.

example:
  solubility fit data.csv --database fe-c --phase BCC_A2 --solute C --exclude GRAPHITE DIAMOND_A4 \\
      --free 'G(BCC_A2,FE:C;0)=GHSERFE#+3*GHSERCC#+A+B*T' --start A=100000 --start B=0
"""

from __future__ import annotations

import argparse

from solubility.cli.commands._common import emit_json


def _named(text: str) -> tuple[str, str]:
    name, sep, value = text.partition("=")
    if not sep or not name.strip():
        raise argparse.ArgumentTypeError(f"{text!r} is not NAME=VALUE")
    return name.strip().upper(), value.strip()


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("data", metavar="DATA.csv", help="measured points (columns above)")
    parser.add_argument("--database", required=True, help="TDB file or bundled name")
    parser.add_argument("--phase", required=True, help="host phase, e.g. BCC_A2")
    parser.add_argument("--solute", required=True, help="interstitial solute, e.g. C")
    parser.add_argument("--free", required=True, metavar="'G(PHASE,M:X;0)=EXPR'", help="the parameter to fit")
    parser.add_argument("--start", action="append", default=[], type=_named, metavar="NAME=VALUE",
                        help="starting value of a free symbol (default 0; repeatable)")
    parser.add_argument("--bounds", action="append", default=[], type=_named, metavar="NAME=LOW:HIGH",
                        help="bounds of a free symbol (repeatable)")
    parser.add_argument("--exclude", nargs="+", action="extend", default=[], metavar="PHASE",
                        help="phases that may not appear")
    parser.add_argument("--pressure", default="101325", metavar="PA", help="pressure, Pa (default 101325)")
    parser.add_argument("--plot", metavar="FILE", help="write the fit and residual figure (.png, .pdf, .svg)")
    parser.add_argument("--overwrite", action="store_true", help="replace existing output files")
    parser.add_argument("--json", action="store_true", help="print one JSON object")


def _float(name: str, text: str) -> float:
    from solubility.errors import InputError

    try:
        return float(text)
    except ValueError:
        raise InputError(f"{name} = {text!r} is not a number") from None


def run(args: argparse.Namespace) -> int:
    from solubility._io import check_output_path
    from solubility.api import fit

    plot = check_output_path(args.plot, overwrite=args.overwrite) if args.plot else None
    start = {n: _float(n, v) for n, v in args.start}
    bounds = {}
    for n, v in args.bounds:
        lo, _, hi = v.partition(":")
        bounds[n] = (_float(n, lo), _float(n, hi))
    res = fit(args.data, args.database, args.phase, args.solute, args.free, start=start, bounds=bounds,
              exclude=args.exclude, pressure=_float("--pressure", args.pressure))
    if plot is not None:
        _write_plot(res, plot)
    if args.json:
        emit_json(res.to_dict())
        return 0
    print(f"{'parameter':<10} {'value':>16} {'stderr':>12}")
    for n, v, s in zip(res.names, res.values, res.stderr, strict=True):
        print(f"{n:<10} {v:>16.8g} {s:>12.3g}")
    print(f"chi2 {res.chi2:.4g}  n_points {res.n_points}  AIC {res.aic:.4g}  BIC {res.bic:.4g}"
          f"  converged {res.converged}")
    return 0


def _write_plot(res, path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from solubility._io import atomic_write
    from solubility.results.fit_plots import plot_fit

    fig = plot_fit(res)[0].figure
    fig.tight_layout()
    try:
        atomic_write(path, lambda tmp: fig.savefig(tmp, format=path.suffix.lstrip(".") or "png", dpi=120))
    finally:
        plt.close(fig)
