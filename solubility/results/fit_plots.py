"""Figures of a fit: measured and fitted solubility against temperature, and the residuals in ln x."""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["plot_fit"]


def plot_fit(result: Any, ax: Any = None) -> Any:
    """Measured points and the fitted solvus (log x against 1000/T), with residuals below.

    Parameters
    ----------
    result
        A `solubility.calc.fitting.FitResult`.
    ax
        Two matplotlib axes (solubility, residuals), or None for a new figure.

    Returns
    -------
    The two axes.
    """
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(2, 1, figsize=(6.0, 6.0), sharex=True, gridspec_kw={"height_ratios": [3, 1]})
    top, bottom = ax
    d = result.data
    inv = 1000.0 / d.T
    order = np.argsort(inv)
    err = d.sigma_rel * d.x if d.weighted else None
    top.errorbar(inv, d.x, yerr=err, fmt="o", ms=4, label="data")
    top.plot(inv[order], result.x_model[order], "-", label="fitted")
    top.set_yscale("log")
    top.set_ylabel("mole fraction x")
    names = ", ".join(f"{n} = {v:.6g} ± {s:.2g}" for n, v, s in zip(result.names, result.values, result.stderr,
                                                                      strict=True))
    top.set_title(names, fontsize=9)
    top.legend()
    bottom.axhline(0.0, color="0.6", lw=0.8)
    bottom.plot(inv, np.log(result.x_model) - np.log(d.x), "o", ms=4)
    bottom.set_xlabel("1000 / T (1/K)")
    bottom.set_ylabel("ln x fitted - ln x")
    return ax
