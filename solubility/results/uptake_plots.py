"""Figures of uptake: content against temperature at several surroundings, and the surface map.

Plot functions take Datasets and ``ax=None`` and return the axes; they never call ``plt.show()``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from solubility.constants import ZERO_CELSIUS
from solubility.errors import InputError

__all__ = ["plot_surface_map", "plot_uptake", "save_uptake_figure"]

_SCALE = {"wt%": ("W", 100.0, "wt%"), "at%": ("X", 100.0, "at%"), "ppm": ("PPM", 1.0, "ppm by mass"),
          "x": ("X", 1.0, "mole fraction")}


def _axes(ax):
    if ax is None:
        import matplotlib.pyplot as plt

        _, ax = plt.subplots()
    return ax


def plot_uptake(datasets, ax=None, *, units: str = "wt%", temperature: str = "C", log: bool = True):
    """Solute content of the host against temperature, one line per Dataset (its surroundings as the label).

    Points where the host is metastable (another phase forms instead) are drawn as open markers on a dashed line;
    points without a number are left out.
    """
    if units not in _SCALE or temperature not in ("C", "K"):
        raise InputError(f"units {units!r} / temperature {temperature!r}: give one of {', '.join(_SCALE)} / C or K")
    if not isinstance(datasets, list | tuple):
        datasets = [datasets]
    ax = _axes(ax)
    var, factor, label = _SCALE[units]
    for ds in datasets:
        T = ds["T"].values - (ZERO_CELSIUS if temperature == "C" else 0.0)
        y = ds[var].values * factor
        status = ds["status"].values
        ok = status == "ok"
        meta = status == "metastable"
        line, = ax.plot(T, np.where(ok, y, np.nan), "-o", ms=3, label=ds.attrs.get("surroundings_value", ""))
        if meta.any():
            ax.plot(T, np.where(meta | np.roll(ok & np.roll(meta, -1), 0), y, np.nan), "--", color=line.get_color(),
                    lw=1)
            ax.plot(T[meta], y[meta], "o", mfc="none", ms=4, color=line.get_color())
    if log:
        ax.set_yscale("log")
    solute, phase = datasets[0].attrs.get("solute"), datasets[0].attrs.get("phase")
    ax.set_xlabel(f"temperature ({'°C' if temperature == 'C' else 'K'})")
    ax.set_ylabel(f"{solute} in {phase} ({label})")
    ax.set_title(f"uptake of {solute} by {phase}  (open markers: metastable)", fontsize=9)
    ax.legend(fontsize=7)
    ax.grid(True, which="both", alpha=0.3)
    return ax


def plot_surface_map(limit, ax=None, *, quantity: str = "activity", temperature: str = "C"):
    """Potential-temperature map of the stable phase at the surface, from the exact boundary of `limit`.

    `limit` is the Dataset of `solubility.results.uptake_dataset.build_limit_dataset`: the host is stable below
    the boundary, the named partner forms above it; partner changes are marked where located.
    """
    if quantity not in limit:
        raise InputError(f"quantity {quantity!r} is not in the limit Dataset; give one of "
                         f"{', '.join(v for v in ('activity', 'p_X2', 'K_N') if v in limit)}")
    ax = _axes(ax)
    T = limit["T"].values - (ZERO_CELSIUS if temperature == "C" else 0.0)
    q = limit[quantity].values
    partner = limit["partner"].values
    ok = np.isfinite(q)
    ax.plot(T[ok], q[ok], "k-", lw=1.5)
    ax.set_yscale("log")
    lo = np.nanmin(q[ok]) / 1e2 if ok.any() else 1e-2
    hi = np.nanmax(q[ok]) * 1e2 if ok.any() else 1e2
    ax.fill_between(T, lo, np.where(ok, q, np.nan), color="tab:blue", alpha=0.15)
    ax.fill_between(T, np.where(ok, q, np.nan), hi, color="tab:red", alpha=0.12)
    ax.set_ylim(lo, hi)
    if "status" in limit:
        unstable = limit["status"].values == "host_unstable"
        if unstable.any():
            ax.fill_between(T, lo, hi, where=unstable, color="0.6", alpha=0.35, step="mid")
            ax.text(float(np.mean(T[unstable])), lo * 3, f"{limit.attrs.get('phase')}\nnot stable", fontsize=8,
                    ha="center", color="0.2")
    host = limit.attrs.get("phase")
    ax.text(0.97, 0.05, f"{host} stable", transform=ax.transAxes, fontsize=9, color="tab:blue", ha="right")
    for name in dict.fromkeys(p for p in partner if p):
        idx = np.flatnonzero(partner == name)
        mid = idx[len(idx) // 2]
        ax.text(T[mid], q[mid] * 8, f"{name.replace('+', ' + ')} forms", fontsize=8, color="tab:red", ha="center")
    for Tc in limit["partner_change_T"].values if "partner_change_T" in limit else ():
        if np.isfinite(Tc):
            ax.axvline(Tc - (ZERO_CELSIUS if temperature == "C" else 0.0), color="0.5", ls=":", lw=1)
    ax.set_xlabel(f"temperature ({'°C' if temperature == 'C' else 'K'})")
    ax.set_ylabel(limit[quantity].attrs.get("long_name", quantity))
    ax.set_title(f"stable phase at the surface: {host} or what forms from it", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    return ax


def uptake_figure(datasets, *, units: str = "wt%", temperature: str = "C", limit=None, quantity: str = "activity"):
    """Content against temperature (and the surface map when `limit` is given) as a Figure; the caller closes it."""
    from solubility.results._layout import pyplot
    from solubility.results.dataset import CAUTION

    plt = pyplot()
    n = 2 if limit is not None else 1
    fig, axes = plt.subplots(1, n, figsize=(6.5 * n, 4.8), layout="constrained", squeeze=False)
    plot_uptake(datasets, axes[0, 0], units=units, temperature=temperature)
    if limit is not None:
        plot_surface_map(limit, axes[0, 1], quantity=quantity, temperature=temperature)
    first = datasets[0] if isinstance(datasets, list | tuple) else datasets
    sha = str(first.attrs.get("database_sha256", ""))[:12]
    fig.text(0.5, -0.01, f"database {first.attrs.get('database')} (sha256 {sha}...); gas data: "
                         f"{first.attrs.get('gas_data_source', '')[:90]}. {CAUTION}", fontsize=6, color="0.35",
             va="top", ha="center", wrap=True)
    return fig


def uptake_figure_bytes(datasets, file_format: str, **kwargs) -> bytes:
    """`uptake_figure` rendered to bytes (png, pdf or svg), the figure closed."""
    import io

    from solubility.results._layout import pyplot

    if file_format not in ("png", "pdf", "svg"):
        raise InputError(f"figure format {file_format!r} is not png, pdf or svg")
    fig = uptake_figure(datasets, **kwargs)
    buf = io.BytesIO()
    try:
        fig.savefig(buf, format=file_format, dpi=150, bbox_inches="tight")
    finally:
        pyplot().close(fig)
    return buf.getvalue()


def save_uptake_figure(datasets, path: str | Path, *, units: str = "wt%", temperature: str = "C",
                       limit=None, quantity: str = "activity") -> Path:
    """Content against temperature (and the surface map when `limit` is given), written atomically."""
    from solubility._io import atomic_write

    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in ("png", "pdf", "svg"):
        raise InputError(f"figure file {str(path)!r} must end in .png, .pdf or .svg")
    data = uptake_figure_bytes(datasets, suffix, units=units, temperature=temperature, limit=limit,
                               quantity=quantity)
    return atomic_write(path, lambda tmp: Path(tmp).write_bytes(data))
