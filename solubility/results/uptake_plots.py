"""Figures of uptake: content against temperature at several surroundings, and the surface map.

Plot functions take Datasets and ``ax=None`` and return the axes; they never call ``plt.show()``.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np

from solubility.constants import ZERO_CELSIUS
from solubility.errors import InputError

__all__ = ["plot_surface_map", "plot_surface_phases", "plot_uptake", "save_uptake_figure", "surface_figure_bytes"]

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
    source = textwrap.shorten(str(first.attrs.get("gas_data_source", "")), 100)
    fig.text(0.5, -0.01, f"database {first.attrs.get('database')} (sha256 {sha}...); gas data: {source}. {CAUTION}",
             fontsize=6, color="0.35",
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


_COLOURS = ("tab:blue", "tab:orange", "tab:green", "tab:red", "tab:purple", "tab:brown", "tab:pink", "tab:olive")


def plot_surface_phases(surface, ax=None, *, temperature: str = "C", lines=()):
    """The stable phase at the surface against the map quantity and temperature (`solubility.surface_map`).

    Each phase's field is filled between its exact boundaries at the mapped temperatures; the boundaries are
    drawn as black lines; hatched fields are where another candidate (named) has a positive driving force.
    `lines` are uptake Datasets whose surroundings are drawn across the map (their ``derived`` K_N, or their
    activity, as the map's quantity).
    """
    if temperature not in ("C", "K"):
        raise InputError(f"temperature {temperature!r}: give C or K")
    ax = _axes(ax)
    T = surface["T"].values - (ZERO_CELSIUS if temperature == "C" else 0.0)
    phase, forms = surface["phase"].values, surface["forms"].values
    lower, upper = surface["lower"].values, surface["upper"].values
    n_r = phase.shape[1]
    seq = [tuple(str(phase[i, r]) for r in range(n_r) if np.isfinite(lower[i, r])) for i in range(T.size)]
    names = list(dict.fromkeys(n for sq in seq for n in sq if n))
    colour = {n: _COLOURS[j % len(_COLOURS)] for j, n in enumerate(names)}
    best: dict[str, tuple[float, float, float]] = {}  # phase -> (size, T, y) of its widest cell, for the label

    def cell(i: int, r: int, xs, ys) -> None:
        name = seq[i][r]
        ax.fill(xs, ys, color=colour.get(name, "0.85"), alpha=0.3, lw=0)
        if forms[i, r]:
            ax.fill(xs, ys, facecolor="none", edgecolor="0.3", hatch="//", lw=0)
        centre = 1.0 - 0.9 * abs(float(np.mean(xs)) - 0.5 * (T[0] + T[-1])) / max(0.5 * float(T[-1] - T[0]), 1e-9)
        size = math.log(upper[i, r] / lower[i, r]) * centre
        if name and size > best.get(name, (-1.0,))[0]:
            extra = f"\n({str(forms[i, r]).replace('+', ', ')} forms)" if forms[i, r] else ""
            best[name] = (size, float(np.mean(xs)), math.sqrt(lower[i, r] * upper[i, r]), extra)

    for i in range(T.size - 1):  # cells between neighbouring temperatures
        j, mid = i + 1, 0.5 * (T[i] + T[i + 1])
        if seq[i] == seq[j]:
            for r in range(len(seq[i])):
                cell(i, r, [T[i], T[j], T[j], T[i]], [lower[i, r], lower[j, r], upper[j, r], upper[i, r]])
                if r:
                    ax.plot([T[i], T[j]], [lower[i, r], lower[j, r]], "k-", lw=1.2)
        else:  # the sequence of phases changes in between: each column holds to the midpoint
            for k, (a, b) in ((i, (T[i], mid)), (j, (mid, T[j]))):
                for r in range(len(seq[k])):
                    cell(k, r, [a, b, b, a], [lower[k, r], lower[k, r], upper[k, r], upper[k, r]])
                    if r:
                        ax.plot([a, b], [lower[k, r]] * 2, "k-", lw=1.2)
            ax.axvline(mid, color="0.4", lw=0.6, ls=":")
    for name, (_, x, y, extra) in best.items():
        ax.text(x, y, name + extra, ha="center", va="center", fontsize=8, color="0.1")
    quantity = surface.attrs.get("quantity", "activity")
    for ds in lines if isinstance(lines, list | tuple) else [lines]:
        y = ds["derived"].values if quantity == "K_N" and "derived" in ds else ds["activity"].values
        if quantity == "p_X2" and "derived" not in ds:
            y = 1e5 * y ** 2
        ax.plot(ds["T"].values - (ZERO_CELSIUS if temperature == "C" else 0.0), y, "--", color="k", lw=1)
        tag = f"K_N = {y[0]:.3g}" if quantity == "K_N" else str(ds.attrs.get("surroundings_value", ""))
        ax.text(ds["T"].values[0] - (ZERO_CELSIUS if temperature == "C" else 0.0), y[0], " " + tag, fontsize=7,
                va="bottom", ha="left")
    ax.set_yscale("log")
    ax.set_ylim(np.nanmin(lower), np.nanmax(upper))
    ax.set_xlim(T.min(), T.max())
    ax.set_xlabel(f"temperature ({'°C' if temperature == 'C' else 'K'})")
    ax.set_ylabel(f"{surface.attrs.get('quantity_long_name', quantity)}")
    ax.set_title(f"stable phase at the surface, {surface.attrs.get('solute')} from the surroundings "
                 f"(database {surface.attrs.get('database')})", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    return ax


def surface_figure_bytes(surface, file_format: str, *, temperature: str = "C", lines=()) -> bytes:
    """`plot_surface_phases` on its own figure, rendered to bytes (png, pdf or svg), the figure closed."""
    import io

    from solubility.results._layout import pyplot
    from solubility.results.dataset import CAUTION

    if file_format not in ("png", "pdf", "svg"):
        raise InputError(f"figure format {file_format!r} is not png, pdf or svg")
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(7.0, 5.0), layout="constrained")
    try:
        plot_surface_phases(surface, ax, temperature=temperature, lines=lines)
        sha = str(surface.attrs.get("database_sha256", ""))[:12]
        fig.text(0.5, -0.01, f"database {surface.attrs.get('database')} (sha256 {sha}...); boundaries exact at each "
                             f"mapped temperature. {CAUTION}", fontsize=6, color="0.35", va="top", ha="center",
                 wrap=True)
        buf = io.BytesIO()
        fig.savefig(buf, format=file_format, dpi=150, bbox_inches="tight")
    finally:
        plt.close(fig)
    return buf.getvalue()
