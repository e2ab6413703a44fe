"""The numbers people quote from a solvus line: its maximum solubility and its Arrhenius fit.

Both are computed from the line's own points (status ``ok``) and its located partner changes, and are added to
the solvus Dataset as 0-d variables (``extreme_*`` and ``fit_*``, each with ``units`` and ``long_name``), so the
table, JSON, CSV and NetCDF quote the same numbers.

The Arrhenius fit is the apparent enthalpy of solution Q in x = A exp(-Q / (R T)), a least-squares straight line
of ln x against 1/T over a run of temperatures with one partner; A (the pre-factor, a mole fraction) is the
intercept at 1/T = 0 and R^2 is the coefficient of determination of that straight line.
"""

from __future__ import annotations

import math

import numpy as np

from solubility.constants import R
from solubility.errors import InputError

__all__ = ["R", "add_summary", "arrhenius_fit", "extreme", "segments"]


def segments(ds) -> list[tuple[str, np.ndarray]]:
    """Runs of consecutive (by temperature) ``ok`` points with one partner: list of (partner, index array).

    Indices point into the Dataset's ``T`` order; each run is sorted by temperature.
    """
    T = ds["T"].values
    status, partner = ds["status"].values, ds["partner"].values
    runs: list[tuple[str, list[int]]] = []
    for i in np.argsort(T, kind="stable"):
        if status[i] != "ok":
            runs.append(("", []))
            continue
        p = str(partner[i])
        if runs and runs[-1][0] == p and runs[-1][1]:
            runs[-1][1].append(int(i))
        else:
            runs.append((p, [int(i)]))
    return [(p, np.array(idx, dtype=int)) for p, idx in runs if idx]


def extreme(ds) -> dict | None:
    """The most solute the host holds on the line, among its ``ok`` points and its located partner changes.

    Returns
    -------
    dict or None
        ``T`` (K), ``X`` (mole fraction), ``W`` (mass fraction), ``partner`` (the partner there; "A|B" at a
        change from A to B), ``at_change`` (the maximum is a located partner change), ``at_range_end`` (the
        maximum is the first or last temperature computed, so the line may rise further outside the range).
        None when the line has no ``ok`` point.
    """
    ok = np.flatnonzero(ds["status"].values == "ok")
    if ok.size == 0:
        return None
    X, W, T = ds["X"].values, ds["W"].values, ds["T"].values
    i = int(ok[np.argmax(X[ok])])
    best = {"T": float(T[i]), "X": float(X[i]), "W": float(W[i]), "partner": str(ds["partner"].values[i]),
            "at_change": False}
    from solubility.results.lower_end import change_rows

    for Tc, xc, wc, below, above in change_rows(ds):
        if math.isfinite(float(xc)) and float(xc) > best["X"]:
            best = {"T": float(Tc), "X": float(xc), "W": float(wc), "partner": f"{below}|{above}",
                    "at_change": True}
    finite_T = T[np.isfinite(T)]
    best["at_range_end"] = (not best["at_change"]) and best["T"] in (float(finite_T.min()), float(finite_T.max()))
    return best


def arrhenius_fit(ds, T_range: tuple[float, float] | None = None) -> dict:
    """Apparent enthalpy of solution: ln x = ln A - Q / (R T), fitted by least squares.

    Parameters
    ----------
    ds
        A solvus Dataset.
    T_range
        (T_min, T_max) in K, both included; the ``ok`` points in it must share one partner. Default: the
        longest run of temperatures with one partner (the higher one on a tie).

    Returns
    -------
    dict
        ``Q`` (J/mol; positive when the solubility rises with temperature), ``A`` (pre-factor, mole fraction),
        ``lnA``, ``T_min``, ``T_max`` (K, of the points used), ``partner``, ``points`` and ``R2``.

    Raises
    ------
    InputError
        Fewer than two ``ok`` points to fit, or a range whose points have different partners.
    """
    if T_range is None:
        runs = segments(ds)
        if not runs:
            raise InputError("the line has no solvus point with a number; there is nothing to fit")
        partner, idx = max(runs, key=lambda r: (r[1].size, float(ds["T"].values[r[1]].max())))
    else:
        lo, hi = sorted(float(t) for t in T_range)
        T = ds["T"].values
        idx = np.flatnonzero((lo <= T) & (hi >= T) & (ds["status"].values == "ok"))
        partners = sorted({str(p) for p in ds["partner"].values[idx]})
        if len(partners) > 1:
            raise InputError(f"the fit range {lo:g}-{hi:g} K holds points with different partners "
                             f"({', '.join(partners)}); choose a range with one partner")
        partner = partners[0] if partners else ""
    if idx.size < 2:
        raise InputError("the Arrhenius fit needs at least two solvus points with a number in its range")
    T = ds["T"].values[idx].astype(float)
    lnx = np.log(ds["X"].values[idx].astype(float))
    slope, intercept = np.polyfit(1.0 / T, lnx, 1)
    resid = lnx - (intercept + slope / T)
    spread = float(np.sum((lnx - lnx.mean()) ** 2))
    r2 = 1.0 - float(np.sum(resid**2)) / spread if spread > 0 else float("nan")
    return {"Q": float(-R * slope), "A": float(math.exp(intercept)), "lnA": float(intercept),
            "T_min": float(T.min()), "T_max": float(T.max()), "partner": partner, "points": int(idx.size),
            "R2": r2}


def add_summary(ds, fit_range: tuple[float, float] | None = None):
    """A copy of `ds` with the ``extreme_*`` and ``fit_*`` variables (0-d; NaN or "" when there is none).

    Parameters
    ----------
    ds
        A solvus Dataset.
    fit_range
        Temperature range of the Arrhenius fit, K (see `arrhenius_fit`); a bad range raises `InputError`.
    """
    ext = extreme(ds) or {"T": math.nan, "X": math.nan, "W": math.nan, "partner": "", "at_change": False,
                          "at_range_end": False}
    try:
        fit = arrhenius_fit(ds, fit_range)
    except InputError:
        if fit_range is not None:
            raise
        fit = {"Q": math.nan, "A": math.nan, "T_min": math.nan, "T_max": math.nan, "partner": "", "points": 0,
               "R2": math.nan}
    solute, host = ds.attrs.get("solute", "solute"), ds.attrs.get("phase", "host")
    new = {
        "extreme_T": (ext["T"], "K", "temperature of the most solute on the line"),
        "extreme_X": (ext["X"], "1", f"most {solute} in {host} on the line, mole fraction"),
        "extreme_W": (ext["W"], "1", f"most {solute} in {host} on the line, mass fraction"),
        "extreme_PPM": (ext["W"] * 1e6, "ppm", f"most {solute} in {host} on the line, parts per million by mass"),
        "extreme_partner": (ext["partner"], "", "partner at the most solute ('A|B' at a change from A to B)"),
        "extreme_at_range_end": (bool(ext["at_range_end"]), "",
                                 "the most solute is at an end of the range (it may rise outside it)"),
        "fit_Q": (fit["Q"], "J/mol", "apparent enthalpy of solution Q in x = A exp(-Q/(R T))"),
        "fit_A": (fit["A"], "1", "pre-factor A in x = A exp(-Q/(R T)), mole fraction"),
        "fit_T_min": (fit["T_min"], "K", "lowest temperature of the Arrhenius fit"),
        "fit_T_max": (fit["T_max"], "K", "highest temperature of the Arrhenius fit"),
        "fit_partner": (fit["partner"], "", "partner of every point of the Arrhenius fit"),
        "fit_points": (int(fit["points"]), "", "number of points in the Arrhenius fit"),
        "fit_R2": (fit["R2"], "1", "coefficient of determination of ln x against 1/T"),
    }
    out = ds.copy()
    for name, (value, units, long_name) in new.items():
        out[name] = ((), np.array(value, dtype=object if isinstance(value, str) else None),
                     {"units": units, "long_name": long_name})
    return out
