"""Figures from solvus Datasets. Every function takes ``ax=None`` and returns the axes; none calls ``show``.

Composition is on the horizontal axis and temperature on the vertical one, as on a phase diagram. Each run of
temperatures with one partner is drawn as its own segment and labelled with that partner.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from solubility.errors import InputError

__all__ = ["apparent_enthalpy", "plot_arrhenius", "plot_solvus", "save_solvus_figure"]

R = 8.314462618  # J/(mol K)
UNITS = {"wt%": ("W", 100.0, "wt%"), "at%": ("X", 100.0, "at%"), "ppm": ("PPM", 1.0, "ppm by mass"),
         "x": ("X", 1.0, "mole fraction")}
TEMPERATURES = ("K", "C")


def _check(units: str, temperature: str) -> None:
    if units not in UNITS:
        raise InputError(f"units {units!r} not known; choose one of {', '.join(UNITS)}")
    if temperature not in TEMPERATURES:
        raise InputError(f"temperature unit {temperature!r} not known; choose K or C")


def _segments(ds):
    """Runs of consecutive (by temperature) valid points with one partner: list of (partner, index array)."""
    T = ds["T"].values
    order = np.argsort(T)
    runs: list[tuple[str, list[int]]] = []
    for i in order:
        if ds["status"].values[i] != "ok":
            runs.append(("", []))
            continue
        partner = str(ds["partner"].values[i])
        if runs and runs[-1][0] == partner and runs[-1][1]:
            runs[-1][1].append(int(i))
        else:
            runs.append((partner, [int(i)]))
    return [(p, np.array(idx)) for p, idx in runs if idx]


def _spacing(T: np.ndarray) -> float:
    """Largest step between the temperatures of the line."""
    steps = np.diff(np.sort(T))
    return float(steps.max()) if steps.size else 0.0


def _change_ends(ds, var: str, temperature: str) -> list[tuple[float, float, set]]:
    """(composition in `var`, temperature, phases on either side) of every located partner change."""
    key = {"X": "partner_change_X", "W": "partner_change_W", "PPM": "partner_change_W"}[var]
    scale = 1e6 if var == "PPM" else 1.0
    out = []
    for comp, Tc, below, above in zip(ds[key].values, ds["partner_change_T"].values, ds["partner_below"].values,
                                      ds["partner_above"].values, strict=True):
        if math.isfinite(float(comp)) and math.isfinite(float(Tc)):
            shown = float(Tc) - (273.15 if temperature == "C" else 0.0)
            out.append((float(comp) * scale, shown, {str(below), str(above)}))
    return out


def plot_solvus(ds, ax=None, *, units: str = "wt%", temperature: str = "C", log: bool = False):
    """The solvus against temperature, one labelled segment per partner.

    Parameters
    ----------
    ds
        A solvus Dataset (`solubility.solvus`).
    ax
        Matplotlib axes; a new figure's axes if None.
    units
        "wt%", "at%", "ppm" or "x" (mole fraction).
    temperature
        "C" or "K".
    log
        Logarithmic composition axis.
    """
    import matplotlib.pyplot as plt

    _check(units, temperature)
    if ax is None:
        _, ax = plt.subplots()
    var, factor, label = UNITS[units]
    T = ds["T"].values - (273.15 if temperature == "C" else 0.0)
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    colour_of: dict[str, str] = {}
    host = ds.attrs.get("phase", "host")
    ends = _change_ends(ds, var, temperature)
    step = _spacing(T)
    for partner, idx in _segments(ds):
        first = partner not in colour_of
        colour = colour_of.setdefault(partner, colours[len(colour_of) % len(colours)])
        xs, ts = list(ds[var].values[idx] * factor), list(T[idx])
        for comp, t_change, phases in ends:  # run each segment on to the exact change temperature
            if partner in phases:
                if ts[-1] < t_change and (t_change - ts[-1]) < 2 * step:
                    xs.append(comp * factor)
                    ts.append(t_change)
                elif ts[0] > t_change and (ts[0] - t_change) < 2 * step:
                    xs.insert(0, comp * factor)
                    ts.insert(0, t_change)
        ax.plot(xs, ts, "-", color=colour, marker="." if idx.size < 30 else None,
                label=f"{host} + {partner}" if first else None)
    for Tc, below, above in zip(ds["partner_change_T"].values, ds["partner_below"].values,
                                ds["partner_above"].values, strict=True):
        if math.isfinite(float(Tc)):
            shown = float(Tc) - (273.15 if temperature == "C" else 0.0)
            ax.axhline(shown, color="0.5", lw=0.8, ls=":")
            ax.annotate(f"{shown:.2f} {'°C' if temperature == 'C' else 'K'}: {below} → {above}",
                        xy=(0.02, shown), xycoords=("axes fraction", "data"), fontsize=7, va="bottom",
                        color="0.3")
    if log:
        ax.set_xscale("log")
    ax.set_xlabel(f"{ds.attrs.get('solute', 'solute')} in {ds.attrs.get('phase', 'host')}, {label}")
    ax.set_ylabel(f"temperature, {'°C' if temperature == 'C' else 'K'}")
    ax.set_title(f"solvus of {ds.attrs.get('solute', '')} in {ds.attrs.get('phase', '')}", fontsize=10)
    ax.grid(True, which="both", lw=0.3, alpha=0.5)
    if ax.get_legend_handles_labels()[1]:
        ax.legend(fontsize=8, loc="best")
    return ax


def apparent_enthalpy(ds, T_range: tuple[float, float] | None = None) -> dict:
    """Apparent enthalpy of solution Q = -R d(ln x)/d(1/T), fitted by least squares.

    Parameters
    ----------
    ds
        A solvus Dataset.
    T_range
        (T_min, T_max) in K; default: the longest run of temperatures with a single partner.

    Returns
    -------
    dict
        ``Q`` (J/mol; positive when the solubility rises with temperature), ``lnA`` (the intercept, ln x at
        1/T = 0), ``T_min``, ``T_max`` (K), ``partner`` and ``points`` (number used).
    """
    segments = _segments(ds)
    if T_range is None:
        if not segments:
            raise InputError("no valid solvus points to fit")
        partner, idx = max(segments, key=lambda t: t[1].size)
    else:
        lo, hi = sorted(float(t) for t in T_range)
        T = ds["T"].values
        idx = np.flatnonzero((lo <= T) & (hi >= T) & (ds["status"].values == "ok"))
        partners = sorted({str(p) for p in ds["partner"].values[idx]})
        partner = "+".join(partners)
    if idx.size < 2:
        raise InputError("the fit needs at least two valid solvus points in the chosen range")
    T = ds["T"].values[idx]
    lnx = np.log(ds["X"].values[idx])
    slope, intercept = np.polyfit(1.0 / T, lnx, 1)
    return {"Q": float(-R * slope), "lnA": float(intercept), "T_min": float(T.min()), "T_max": float(T.max()),
            "partner": partner, "points": int(idx.size)}


def plot_arrhenius(ds, ax=None, *, T_range: tuple[float, float] | None = None):
    """ln x against 1000/T, with the fitted apparent enthalpy of solution drawn and stated."""
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots()
    ok = ds["status"].values == "ok"
    T = ds["T"].values[ok]
    ax.plot(1000.0 / T, np.log(ds["X"].values[ok]), ".", ms=3, color="0.2", label="solvus")
    fit = apparent_enthalpy(ds, T_range)
    inv = np.linspace(1000.0 / fit["T_max"], 1000.0 / fit["T_min"], 50)
    ax.plot(inv, fit["lnA"] - fit["Q"] / R * inv / 1000.0, "-", color="C3", lw=1.2,
            label=f"Q = {fit['Q'] / 1000:.1f} kJ/mol ({fit['T_min']:.0f}-{fit['T_max']:.0f} K, + {fit['partner']})")
    ax.set_xlabel("1000 / T, 1/K")
    ax.set_ylabel(f"ln x({ds.attrs.get('solute', '')})")
    ax.set_title("Arrhenius view", fontsize=10)
    ax.grid(True, lw=0.3, alpha=0.5)
    ax.legend(fontsize=8)
    return ax


def save_solvus_figure(ds, path: str | Path, *, units: str = "wt%", temperature: str = "C",
                       T_range: tuple[float, float] | None = None) -> Path:
    """A report figure: linear and log solvus and the Arrhenius view, with provenance; written atomically.

    The format follows the file name's suffix (png, pdf, svg).
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    from solubility._io import atomic_write
    from solubility.results.dataset import CAUTION

    _check(units, temperature)
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in ("png", "pdf", "svg"):
        raise InputError(f"figure file {str(path)!r} must end in .png, .pdf or .svg")
    fig, axes = plt.subplots(1, 3, figsize=(15, 4.8), layout="constrained")
    plot_solvus(ds, axes[0], units=units, temperature=temperature)
    plot_solvus(ds, axes[1], units=units, temperature=temperature, log=True)
    if int(np.sum(ds["status"].values == "ok")) >= 2:
        plot_arrhenius(ds, axes[2], T_range=T_range)
    else:
        axes[2].set_axis_off()
    sha = str(ds.attrs.get("database_sha256", ""))[:12]
    fig.text(0.5, -0.01, f"database {ds.attrs.get('database')} (sha256 {sha}...), solubility "
                           f"{ds.attrs.get('solubility_version')}, pycalphad {ds.attrs.get('pycalphad_version')}. "
                           f"{CAUTION}", fontsize=7, color="0.35", va="top", ha="center")
    try:
        return atomic_write(path, lambda tmp: fig.savefig(tmp, format=suffix, dpi=150, bbox_inches="tight"))
    finally:
        plt.close(fig)
