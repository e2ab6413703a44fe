"""Figures of a fit: measured and fitted solubility against 1000/T (with the band when there is one), residuals.

Several fits of the same data (site choices compared) are drawn on the same axes, one colour each.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

__all__ = ["plot_fit"]


def _error_bars(result: Any, x: np.ndarray) -> np.ndarray:
    """Asymmetric error bars (2, n) of the points: exp(+-sigma_rel), or exp(+-s) with s the fit's scatter."""
    d = result.data
    s = d.sigma_rel if d.weighted else np.full(x.size, np.sqrt(result.chi2 / max(result.dof, 1)))
    return np.vstack([x - x * np.exp(-s), x * np.exp(s) - x])


def plot_fit(result: Any, ax: Any = None, band: Any = None, labels: Sequence[str] | None = None) -> Any:
    """Measured points and the fitted line (log x against 1000/T), with residuals below.

    Parameters
    ----------
    result
        A `solubility.calc.fitting.FitResult`, or a sequence of fits of the same data.
    ax
        Two matplotlib axes (solubility, residuals), or None for a new figure.
    band
        A band Dataset (`solubility.results.fit_dataset.build_band_dataset`) or one per fit: the line and its
        shaded band are drawn over its temperatures, with the points measured on that line (gas points at its
        pressure, ...).
    labels
        One label per fit (default "fitted").

    Returns
    -------
    The two axes.
    """
    import matplotlib.pyplot as plt

    results = list(result) if isinstance(result, (list, tuple)) else [result]
    bands = list(band) if isinstance(band, (list, tuple)) else [band] * len(results)
    labels = list(labels) if labels is not None else ["fitted"] * len(results)
    if ax is None:
        _, ax = plt.subplots(2, 1, figsize=(6.4, 6.4), sharex=True, gridspec_kw={"height_ratios": [3, 1]})
    top, bottom = ax
    d = results[0].data
    inv = 1000.0 / d.T
    show = np.ones(d.T.size, dtype=bool)
    for i, (res, bd, lab) in enumerate(zip(results, bands, labels, strict=True)):
        colour = f"C{i + 1}"
        if bd is not None:
            line = bd.attrs["band_line"]
            show = np.array([_line_of(k, v) == line for k, v in zip(d.kind, d.value, strict=True)])
            Tb = bd["T"].values
            top.fill_between(1000.0 / Tb, bd["X_LOWER"].values, bd["X_UPPER"].values, color=colour, alpha=0.25,
                             lw=0, label=f"{lab}: {100 * bd.attrs['confidence']:g} % band ({bd.attrs['band_method']})")
            top.plot(1000.0 / Tb, bd["X"].values, "-", color=colour, lw=1.2, label=f"{lab} ({line})")
        else:
            order = np.argsort(inv)
            top.plot(inv[order], res.x_model[order], "-", color=colour, label=lab)
        bottom.plot(inv, np.log(res.x_model) - np.log(d.x), "o" if i == 0 else "x", ms=4, color=colour)
    kind = "σ_rel" if d.weighted else "fit scatter"
    where = f" at {bands[0].attrs['band_line']}" if bands[0] is not None and not show.all() else ""
    top.errorbar(inv[show], d.x[show], yerr=_error_bars(results[0], d.x)[:, show], fmt="o", ms=4, color="C0",
                 capsize=2, label=f"data{where} (±1 {kind})", zorder=5)
    top.set_yscale("log")
    top.set_ylabel("mole fraction x")
    if len(results) == 1:
        r = results[0]
        top.set_title(", ".join(f"{n} = {v:.6g} ± {s:.2g}" for n, v, s in zip(r.names, r.values, r.stderr,
                                                                                strict=True)), fontsize=9)
    top.legend(fontsize=7)
    secondary = top.secondary_xaxis("top", functions=(_inverse, _inverse))
    secondary.set_xticks(_temperature_ticks(*top.get_xlim()))
    secondary.set_xlabel("T (K)")
    bottom.axhline(0.0, color="0.6", lw=0.8)
    bottom.set_xlabel("10³ K / T")
    bottom.set_ylabel("ln x fitted - ln x")
    return ax


def _temperature_ticks(lo: float, hi: float) -> list[float]:
    """Round temperatures (K) for the top axis, at least 9 % of the axis apart in 10^3 K / T (no overlap)."""
    candidates = [200, 250, 300, 400, 500, 600, 700, 800, 1000, 1200, 1500, 2000, 2500, 3000]
    span = abs(hi - lo) or 1.0
    kept: list[float] = []
    for T in sorted(candidates):  # high 1/T first: the crowded end of the axis is at high T
        pos = 1000.0 / T
        if min(lo, hi) <= pos <= max(lo, hi) and all(abs(pos - 1000.0 / k) >= 0.09 * span for k in kept):
            kept.append(float(T))
    return kept


def _inverse(v: Any) -> Any:
    with np.errstate(divide="ignore"):
        return 1000.0 / np.asarray(v, dtype=float)


def _line_of(kind: str, value: float) -> str:
    """The band_line text of a data point's condition (as `solubility.calc.fit_bands.Band.description`)."""
    if kind == "solvus":
        return "solvus"
    return f"p(X2) = {value:g} Pa" if kind == "p_Pa" else f"activity {value:g}"
