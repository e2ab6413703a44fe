"""Fit free parameters of a model to measured solubility (least squares in ln x, the exact engines as model).

DATA.csv columns: T_K; one of x, wt_percent, ppm; optional partner (a solvus point against that phase), p_Pa (in
equilibrium with the pure diatomic gas X2 at that partial pressure, Pa), activity (at that activity of the solute
against its reference state), sigma_rel (relative standard uncertainty), source.
Every name in EXPR that is no FUNCTION of the database is fitted.

--site KIND[:BLOCKING] (repeatable) fits the same data under each site choice of the host phase (the phase
re-expressed for c = a n (1 - b); {c} in EXPR stands for each choice's c) and prints the fits side by side with
chi2, AIC and BIC, and whether the data can tell the choices apart.
--band T_SPEC gives the fitted line over those temperatures with its band at --confidence (from the fitted
covariance, or from --samples FILE.csv, one column per free symbol); --band-output writes it, --plot draws it.

examples:
  solubility fit data.csv --database fe-c --phase BCC_A2 --solute C --exclude GRAPHITE DIAMOND_A4 \\
      --free 'G(BCC_A2,FE:C;0)=GHSERFE#+3*GHSERCC#+A+B*T' --start A=100000 --start B=0
  solubility fit h.csv --database fe-h.tdb --phase BCC_A2 --solute H --free 'G(BCC_A2,FE:H;0)=GHSERFE#+{c}*(A+B*T)' \\
      --site octahedral --site tetrahedral --band 300:1100:10 --plot band.png
"""

from __future__ import annotations

import argparse

from solubility.cli.commands._common import emit_json
from solubility.cli.commands.solvus import _names


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
    parser.add_argument("--exclude", action="append", default=[], type=_names, metavar="PHASE[,PHASE...]",
                        help="phases that may not appear: --exclude A,B or --exclude A --exclude B")
    parser.add_argument("--pressure", default="101325", metavar="PA", help="pressure, Pa (default 101325)")
    parser.add_argument("--site", action="append", default=[], metavar="KIND[:BLOCKING]",
                        help="fit under this site choice (repeat to compare several)")
    parser.add_argument("--structure", metavar="LATTICE",
                        help="lattice of the site choices (default from the phase name: BCC_A2 -> bcc)")
    parser.add_argument("--band", metavar="T_SPEC", help="temperatures (K, START:STOP:STEP) of the band")
    parser.add_argument("--band-line", metavar="LINE", help="solvus, p_Pa=VALUE or activity=VALUE (default: the "
                        "data's one condition)")
    parser.add_argument("--confidence", default="0.95", metavar="P", help="confidence of the band (default 0.95)")
    parser.add_argument("--samples", metavar="FILE.csv", help="parameter samples for the band (e.g. an MCMC trace)")
    parser.add_argument("--band-output", metavar="FILE", help="write the band Dataset (.nc or .csv)")
    parser.add_argument("--output", metavar="FILE", help="write the database with the fitted values (.tdb)")
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
    from solubility._io import atomic_outputs, check_outputs
    from solubility.api import fit, fit_band, fit_sites
    from solubility.errors import InputError

    given = [args.plot, args.band_output, args.output]
    checked = iter(check_outputs([g for g in given if g], overwrite=args.overwrite,
                                 inputs=[args.data, args.database, args.samples]))
    plot, band_out, tdb_out = (next(checked) if g else None for g in given)
    if band_out is not None and band_out.suffix.lower() not in (".nc", ".csv"):
        raise InputError(f"--band-output {args.band_output!r}: give a .nc or .csv file")
    if (band_out is not None or args.samples or args.band_line) and not args.band:
        raise InputError("--band-output, --band-line and --samples need --band T_SPEC")
    if tdb_out is not None and len(args.site) > 1:
        raise InputError("--output writes one fitted database; give one --site with it")
    start = {n: _float(n, v) for n, v in args.start}
    bounds = {}
    for n, v in args.bounds:
        lo, _, hi = v.partition(":")
        bounds[n] = (_float(n, lo), _float(n, hi))
    common = dict(start=start, bounds=bounds, exclude=[n for group in args.exclude for n in group],
                  pressure=_float("--pressure", args.pressure))
    comparison = None
    if args.site:
        comparison = fit_sites(args.data, args.database, args.phase, args.solute, args.free, args.site,
                               structure=args.structure, **common)
        results = list(comparison.results)
    else:
        results = [fit(args.data, args.database, args.phase, args.solute, args.free, **common)]
    bands = [fit_band(r, args.band, line=args.band_line, confidence=_float("--confidence", args.confidence),
                      samples=args.samples) for r in results] if args.band else []
    with atomic_outputs() as out:
        if tdb_out is not None:
            from solubility.calc.fitting import fitted_database_text

            out.write_text(tdb_out, fitted_database_text(results[0]))
        if band_out is not None:
            out.write(band_out, lambda tmp: _write_band(bands[0], tmp, band_out.suffix.lower()))
        if plot is not None:
            labels = comparison.labels if comparison is not None else None
            out.write(plot, lambda tmp: _write_plot(results, bands or None, labels, tmp, plot.suffix))
    if args.json:
        obj = comparison.to_dict() if comparison is not None else results[0].to_dict()
        if bands:
            obj["bands"] = [_band_json(b) for b in bands]
        emit_json(obj)
        return 0
    if comparison is not None:
        print(f"site choices in {comparison.structure} ({results[0].extra['phase']}, {results[0].extra['solute']}):")
        print(comparison.table())
        print(comparison.verdict()[1])
    else:
        res = results[0]
        print(f"{'parameter':<10} {'value':>16} {'stderr':>12}")
        for n, v, s in zip(res.names, res.values, res.stderr, strict=True):
            print(f"{n:<10} {v:>16.8g} {s:>12.3g}")
        print(f"chi2 {res.chi2:.4g}  n_points {res.n_points}  AIC {res.aic:.4g}  BIC {res.bic:.4g}"
              f"  converged {res.converged}")
    for b, label in zip(bands, comparison.labels if comparison is not None else [""], strict=False):
        w = (b["X_UPPER"] / b["X_LOWER"]).values
        print(f"band{' ' + label if label else ''}: {b.attrs['band_line']}, {100 * b.attrs['confidence']:g} % "
              f"({b.attrs['band_method']}), x_upper/x_lower {float(w.min()):.4g} to {float(w.max()):.4g} over "
              f"{b['T'].values[0]:g}-{b['T'].values[-1]:g} K")
    return 0


def _band_json(ds) -> dict:
    def vals(name):
        return [None if v != v else float(v) for v in ds[name].values]

    return {"line": ds.attrs["band_line"], "confidence": ds.attrs["confidence"], "method": ds.attrs["band_method"],
            "temperature_K": vals("T"), "x": vals("X"), "x_lower": vals("X_LOWER"), "x_upper": vals("X_UPPER")}


def _write_band(ds, tmp, suffix: str) -> None:
    if suffix == ".nc":
        ds.to_netcdf(tmp)
    else:
        ds.to_dataframe().to_csv(tmp, float_format="%.10g")


def _write_plot(results, bands, labels, path, suffix: str) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from solubility.results.fit_plots import plot_fit

    fig = plot_fit(results, band=bands, labels=labels)[0].figure
    fig.tight_layout()
    try:
        fig.savefig(path, format=suffix.lstrip(".") or "png", dpi=120)
    finally:
        plt.close(fig)
