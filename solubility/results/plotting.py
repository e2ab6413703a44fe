"""Figures from solvus Datasets. Every function takes ``ax=None`` and returns the axes; none calls ``show``.

Composition is on the horizontal axis and temperature on the vertical one, as on a phase diagram. Each run of
temperatures with one partner is drawn as its own segment, in one colour per partner on every panel, with a
marker at every computed point. Partner changes (of the lower end too) are dotted lines labelled with their
temperature; the most solute on the line is marked with a star and annotated with its composition and temperature.
Labels are placed where they touch no data; a segment too small to see on a linear axis is shown enlarged in an inset.
Temperatures on figures are rounded to whole degrees (a database's invariant temperatures are uncertain by a
few kelvin); compositions to three significant digits. Phase names are the database's unless `labels` maps
them to display names (``{"BCC_A2": "ferrite"}``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from solubility.constants import ZERO_CELSIUS
from solubility.errors import InputError
from solubility.results._layout import free_boxes, place_text, pyplot, readable_ticks
from solubility.results.summary import R, arrhenius_fit, extreme, segments

__all__ = ["apparent_enthalpy", "plot_arrhenius", "plot_solvus", "save_solvus_figure", "solvus_figure"]

UNITS = {"wt%": ("W", 100.0, "wt%"), "at%": ("X", 100.0, "at%"), "ppm": ("PPM", 1.0, "ppm by mass"),
         "x": ("X", 1.0, "mole fraction")}
TEMPERATURES = ("K", "C")
MARKER = {"marker": "o", "ms": 3.0}
#: a segment narrower than this fraction of the linear axis is shown enlarged in an inset
SMALL = 0.03


def _check(units: str, temperature: str) -> None:
    if units not in UNITS:
        raise InputError(f"units {units!r} not known; choose one of {', '.join(UNITS)}")
    if temperature not in TEMPERATURES:
        raise InputError(f"temperature unit {temperature!r} not known; choose K or C")


def display(name: str, labels: Mapping[str, str] | None) -> str:
    """Display name of a phase or of "A+B" partners (database names unless `labels` maps them)."""
    labels = labels or {}
    return " + ".join(labels.get(p, p) for p in str(name).split("+"))


def _tu(temperature: str) -> str:
    return "°C" if temperature == "C" else "K"


def _shown(T_K: float, temperature: str) -> float:
    return T_K - (ZERO_CELSIUS if temperature == "C" else 0.0)


def _sig(v: float, digits: int = 3) -> str:
    """`v` to `digits` significant digits, plain decimals for 1e-4..1e5, otherwise m x 10^k (mathtext)."""
    if v == 0 or not math.isfinite(v):
        return f"{v:g}"
    if 1e-4 <= abs(v) < 1e5:
        return np.format_float_positional(v, precision=digits, unique=False, fractional=False, trim="-")
    exp = math.floor(math.log10(abs(v)))
    return rf"{v / 10**exp:.{digits - 1}f}$\times10^{{{exp}}}$"


def partner_colours(ds) -> dict[str, str]:
    """One colour per partner, in the order partners first appear with rising temperature."""
    import matplotlib as mpl

    from solubility.results.lower_end import lower_runs

    cycle = mpl.rcParams["axes.prop_cycle"].by_key()["color"]
    out: dict[str, str] = {}
    for partner, _ in [*segments(ds), *lower_runs(ds)]:
        out.setdefault(partner, cycle[len(out) % len(cycle)])
    return out


def _segment_xy(ds, partner: str, idx: np.ndarray, var: str, factor: float, temperature: str, low: bool = False):
    """Composition and temperature of a segment, run on to the located changes at its ends (of the lower end's
    partner with `low`)."""
    T = ds["T"].values
    xs, ts = list(ds[f"{var}_LOW" if low else var].values[idx] * factor), [_shown(t, temperature) for t in T[idx]]
    steps = np.diff(np.sort(T[np.isfinite(T)]))
    step = float(steps.max()) if steps.size else 0.0
    p = "partner_low" if low else "partner"
    if f"{p}_change_T" not in ds:
        return np.array(xs), np.array(ts)
    for comp, Tc, below, above in zip(ds[f"{p}_change_{var}"].values, ds[f"{p}_change_T"].values,
                                      ds[f"{p}_below"].values, ds[f"{p}_above"].values, strict=True):
        if not (math.isfinite(float(comp)) and math.isfinite(float(Tc))) or partner not in (below, above):
            continue
        if T[idx[-1]] < Tc < T[idx[-1]] + 2 * step and partner == below:
            xs.append(float(comp) * factor)
            ts.append(_shown(float(Tc), temperature))
        elif T[idx[0]] - 2 * step < Tc < T[idx[0]] and partner == above:
            xs.insert(0, float(comp) * factor)
            ts.insert(0, _shown(float(Tc), temperature))
    return np.array(xs), np.array(ts)


def _to_field_ends(ds, partner, xs, T, var, factor, temperature, ts=None):
    """A run (compositions xs at temperatures T in K, or already shown as ts) run on to the nearer end of it where
    the host's field opens or closes with `partner` (the upper and lower ends meet there)."""
    ts = np.array([_shown(t, temperature) for t in T]) if ts is None else np.asarray(ts)
    xs = np.asarray(xs, dtype=float)
    if "field_end_T" not in ds or not len(ts):
        return xs, ts
    for Tf, c, with_ in zip(ds["field_end_T"].values, ds[f"field_end_{var}"].values, ds["field_end_with"].values,
                            strict=True):
        if partner not in str(with_).split("+") or not (math.isfinite(float(Tf)) and math.isfinite(float(c))):
            continue
        shown = _shown(float(Tf), temperature)
        if abs(shown - ts[0]) <= abs(shown - ts[-1]):
            xs, ts = np.insert(xs, 0, float(c) * factor), np.insert(ts, 0, shown)
        else:
            xs, ts = np.append(xs, float(c) * factor), np.append(ts, shown)
    return xs, ts


def _draw_segments(ax, ds, var, factor, temperature, labels, colours):
    host = display(ds.attrs.get("phase", "host"), labels)
    drawn = []
    for partner, idx in segments(ds):
        xs, ts = _segment_xy(ds, partner, idx, var, factor, temperature)
        xs, ts = _to_field_ends(ds, partner, xs, None, var, factor, temperature, ts)
        first = partner not in {p for p, _, _ in drawn}
        ax.plot(xs, ts, "-", color=colours[partner], lw=1.4, **MARKER,
                label=f"{host} + {display(partner, labels)}" if first else None)
        drawn.append((partner, xs, ts))
    n_upper = len(drawn)
    from solubility.results.lower_end import lower_runs

    for partner, idx in lower_runs(ds):  # the lower end of the field: dashed, in the same colours
        xs, ts = _segment_xy(ds, partner, idx, var, factor, temperature, low=True)
        xs, ts = _to_field_ends(ds, partner, xs, None, var, factor, temperature, ts)
        first = partner not in {p for p, _, _ in drawn[n_upper:]}
        ax.plot(xs, ts, "--", color=colours[partner], lw=1.4, **MARKER,
                label=f"lower end: {host} + {display(partner, labels)}" if first else None)
        drawn.append((partner, xs, ts))
    return drawn


def _change_lines(ax, ds, temperature, labels, obstacles):
    tu = _tu(temperature)
    from solubility.results.lower_end import change_rows

    events = [(which, row) for low, which in ((False, ""), (True, "lower end ")) for row in change_rows(ds, low)]
    for which, (Tc, _, _, below, above) in events:
        if not math.isfinite(float(Tc)):
            continue
        shown = _shown(float(Tc), temperature)
        ax.axhline(shown, color="0.55", lw=0.8, ls=":", gid="guide")
        ax.figure.draw_without_rendering()
        fy = ax.transLimits.transform((ax.get_xlim()[0], shown))[1]
        anchors = [(fx, fy + dy, ha, va) for dy, va in ((0.006, "bottom"), (-0.006, "top"))
                   for fx, ha in ((0.02, "left"), (0.98, "right"), (0.5, "center"))]
        place_text(ax, f"{which}{shown:.0f} {tu}: {display(below, labels)} → {display(above, labels)}", anchors=anchors,
                   obstacles=obstacles, fontsize=7, color="0.25")


def _mark_extreme(ax, ds, var, factor, unit_label, temperature, labels, obstacles, annotate: bool):
    ext = extreme(ds)
    if ext is None:
        return
    comp = {"W": ext["W"], "X": ext["X"], "PPM": ext["W"] * 1e6}[var] * factor
    shown = _shown(ext["T"], temperature)
    ax.plot([comp], [shown], linestyle="none", marker="*", ms=10, mfc="gold", mec="0.2", mew=0.6, zorder=5)
    if annotate:
        solute = ds.attrs.get("solute", "solute")
        edge = " (end of range)" if ext["at_range_end"] else ""
        text = f"most {solute}: {_sig(comp)} {unit_label}\nat {shown:.0f} {_tu(temperature)}{edge}"
        place_text(ax, text, xy=(comp, shown), obstacles=obstacles, fontsize=8,
                   bbox={"boxstyle": "round,pad=0.3", "fc": "white", "ec": "0.6", "lw": 0.6})


def _inset(ax, drawn, unit, temperature, obstacles):
    """Enlarge the segments too narrow to see on the linear axis; returns the inset axes or None."""
    top = max(float(np.nanmax(xs)) for _, xs, _ in drawn)
    small = [(p, xs, ts) for p, xs, ts in drawn if top > 0 and float(np.nanmax(xs)) < SMALL * top]
    if not small:
        return None
    c_max = 3.0 * max(float(np.nanmax(xs)) for _, xs, _ in small)
    t_in = [t for _, xs, ts in drawn for x, t in zip(xs, ts, strict=True) if x <= c_max]
    span = max(t_in) - min(t_in) or 1.0
    rects = [(0.55, 0.1, 0.4, 0.36), (0.55, 0.56, 0.4, 0.36), (0.12, 0.56, 0.4, 0.36), (0.12, 0.1, 0.4, 0.36),
             (0.55, 0.33, 0.4, 0.36)]
    for rect in rects:
        ins = ax.inset_axes(rect)
        for line in ax.get_lines():
            if line.get_gid() != "guide" and line.get_linestyle() != "None":
                ins.plot(line.get_xdata(), line.get_ydata(), "-", color=line.get_color(), lw=1.2, **MARKER)
        ins.set_xlim(0.0, c_max * 1.05)
        ins.set_ylim(min(t_in) - 0.05 * span, max(t_in) + 0.05 * span)
        ins.tick_params(labelsize=6.5, length=2)
        ins.set_title(f"enlarged ({unit}, {_tu(temperature)})", fontsize=7, pad=2)
        ins.grid(True, lw=0.3, alpha=0.5)
        readable_ticks(ins, "x", nbins=4)
        readable_ticks(ins, "y", nbins=4)
        box = ins.get_tightbbox()
        if free_boxes(ax, [box], obstacles, pad=2.0):
            obstacles.append(box)
            return ins
        ins.remove()
    return None


def plot_solvus(ds, ax=None, *, units: str = "wt%", temperature: str = "C", log: bool = False,
                labels: Mapping[str, str] | None = None, legend: bool = True, annotate: bool = True,
                inset: bool = True, title: str | None = None):
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
    labels
        Display names of phases, e.g. ``{"BCC_A2": "ferrite"}``.
    legend
        Draw a legend of the partners in the axes.
    annotate
        Annotate the most solute on the line with its composition and temperature (it is starred anyway).
    inset
        On a linear axis, enlarge segments narrower than 3 % of the axis in an inset.
    title
        Axes title (default: "solvus of SOLUTE in HOST").
    """
    plt = pyplot()
    _check(units, temperature)
    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4.8), layout="constrained")
    var, factor, unit_label = UNITS[units]
    colours = partner_colours(ds)
    drawn = _draw_segments(ax, ds, var, factor, temperature, labels, colours)
    solute, host = ds.attrs.get("solute", "solute"), display(ds.attrs.get("phase", "host"), labels)
    if log:
        ax.set_xscale("log")
        values = np.concatenate([xs for _, xs, _ in drawn]) if drawn else np.array([])
        values = values[np.isfinite(values) & (values > 0)]
        if values.size and values.max() / values.min() < 2.0:  # too narrow for readable log ticks
            centre = math.sqrt(values.max() * values.min())
            ax.set_xlim(centre / 1.5, centre * 1.5)
    elif drawn:
        ax.set_xlim(left=0.0, right=max(float(np.nanmax(xs)) for _, xs, _ in drawn) * 1.08)
    ax.set_xlabel(f"{solute} in {host}, {unit_label}")
    ax.set_ylabel(f"temperature, {_tu(temperature)}")
    ax.set_title(f"solvus of {solute} in {host}" if title is None else title, fontsize=10)
    ax.grid(True, which="major", lw=0.3, alpha=0.5)
    ax.figure.draw_without_rendering()
    readable_ticks(ax, "x")
    readable_ticks(ax, "y")
    obstacles: list = []
    if legend and colours:
        for loc in ("upper left", "upper right", "lower right", "lower left", "center right", "center left"):
            leg = ax.legend(fontsize=8, loc=loc)
            ax.figure.draw_without_rendering()
            if free_boxes(ax, [leg.get_window_extent()]):
                break
        obstacles.append(leg.get_window_extent())
    if drawn and inset and not log:
        _inset(ax, drawn, unit_label, temperature, obstacles)
    _mark_extreme(ax, ds, var, factor, unit_label, temperature, labels, obstacles, annotate)
    _change_lines(ax, ds, temperature, labels, obstacles)
    return ax


def apparent_enthalpy(ds, T_range: tuple[float, float] | None = None) -> dict:
    """Apparent enthalpy of solution Q = -R d(ln x)/d(1/T), fitted by least squares.

    See `solubility.results.summary.arrhenius_fit` (``Q`` J/mol, ``A``, ``lnA``, ``T_min``, ``T_max`` K,
    ``partner``, ``points``, ``R2``).
    """
    return arrhenius_fit(ds, T_range)


def plot_arrhenius(ds, ax=None, *, T_range: tuple[float, float] | None = None,
                   labels: Mapping[str, str] | None = None, legend: bool = True, title: str | None = None):
    """ln x against 10^3 K / T, points coloured by partner, with the Arrhenius fit drawn over its range.

    The fit (`solubility.results.summary.arrhenius_fit`) is stated in words: the apparent enthalpy of solution
    Q in kJ/mol, the pre-factor A of x = A exp(-Q/RT), the temperatures and partner it covers and R^2.
    """
    plt = pyplot()
    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4.8), layout="constrained")
    colours = partner_colours(ds)
    T, X = ds["T"].values, ds["X"].values
    for partner, idx in segments(ds):
        first = partner not in {ln.get_label() for ln in ax.get_lines()}
        ax.plot(1e3 / T[idx], np.log(X[idx]), "-", color=colours[partner], lw=0.8, **MARKER,
                label=display(partner, labels) if first else None)
    fit = arrhenius_fit(ds, T_range)
    ax.axvspan(1e3 / fit["T_max"], 1e3 / fit["T_min"], color="0.92", zorder=0, gid="guide")
    inv = np.linspace(1e3 / fit["T_max"], 1e3 / fit["T_min"], 50)
    ax.plot(inv, fit["lnA"] - fit["Q"] / R * inv / 1e3, "-", color="black", lw=1.0, gid="guide")
    solute = ds.attrs.get("solute", "solute")
    ax.set_xlabel("10³ K / T")
    ax.set_ylabel(f"ln x({solute}), x = mole fraction in {display(ds.attrs.get('phase', 'host'), labels)}")
    ax.set_title("Arrhenius view" if title is None else title, fontsize=10)
    ax.grid(True, lw=0.3, alpha=0.5)
    ax.figure.draw_without_rendering()
    readable_ticks(ax, "x")
    readable_ticks(ax, "y")
    obstacles: list = []
    if legend and colours:
        leg = ax.legend(fontsize=8, loc="best", title="partner", title_fontsize=8)
        ax.figure.draw_without_rendering()
        obstacles.append(leg.get_window_extent())
    text = (f"fit (black line, shaded range): against {display(fit['partner'], labels)},\n"
            f"{fit['T_min']:.0f}-{fit['T_max']:.0f} K, {fit['points']} points, R² = {fit['R2']:.6f}\n"
            f"apparent enthalpy of solution Q = {fit['Q'] / 1e3:.1f} kJ/mol\n"
            f"pre-factor A = {_sig(fit['A'])} in x = A exp(-Q / RT)")
    place_text(ax, text, obstacles=obstacles, fontsize=7.5,
               bbox={"boxstyle": "round,pad=0.3", "fc": "white", "ec": "0.6", "lw": 0.6})
    return ax


def solvus_figure(ds, *, units: str = "wt%", temperature: str = "C", T_range: tuple[float, float] | None = None,
                  labels: Mapping[str, str] | None = None):
    """The report figure (see `save_solvus_figure`) as a matplotlib Figure; the caller closes it."""
    from solubility.results.dataset import CAUTION

    plt = pyplot()
    _check(units, temperature)
    n_ok = int(np.sum(ds["status"].values == "ok"))
    if n_ok == 0:
        states = ", ".join(sorted({str(s) for s in ds["status"].values}))
        raise InputError(f"no point of the line has a number (status {states}); there is nothing to draw")
    if T_range is not None:
        arrhenius_fit(ds, T_range)  # a bad range is refused before anything is drawn
    panels = 3 if n_ok >= 2 else 2
    fig = plt.figure(figsize=(5.2 * panels, 5.9), layout="constrained")
    try:
        grid = fig.add_gridspec(2, panels, height_ratios=[1.0, 0.2])
        axes = [fig.add_subplot(grid[0, k]) for k in range(panels)]
        foot = fig.add_subplot(grid[1, :])
        foot.set_axis_off()
        # figure-level texts first, so the layout is final before labels are placed inside the panels
        from matplotlib.lines import Line2D

        solute, host = ds.attrs.get("solute", "solute"), display(ds.attrs.get("phase", "host"), labels)
        colours = partner_colours(ds)
        from solubility.results.lower_end import lower_runs

        upper = list(dict.fromkeys(p for p, _ in segments(ds)))
        lower = list(dict.fromkeys(p for p, _ in lower_runs(ds)))
        handles = [Line2D([], [], color=colours[p], lw=1.4, ls=ls, **MARKER)
                   for ps, ls in ((upper, "-"), (lower, "--")) for p in ps]
        names = [f"{host} + {display(p, labels)}" for p in upper]
        names += [f"lower end: {host} + {display(p, labels)}" for p in lower]
        foot.legend(handles, names, loc="upper center", ncols=min(len(names), 4), fontsize=9, frameon=False,
                    title="segments, by the partner phase on the boundary", title_fontsize=9)
        fig.suptitle(f"Solubility limit (solvus) of {solute} in {host}; star: the most {solute} on the line",
                     fontsize=11)
        sha = str(ds.attrs.get("database_sha256", ""))[:12]
        foot.text(0.5, 0.0, f"database {ds.attrs.get('database')} (sha256 {sha}...), pressure "
                            f"{float(ds.attrs.get('pressure_Pa', math.nan)):g} Pa, solubility "
                            f"{ds.attrs.get('solubility_version')}, pycalphad {ds.attrs.get('pycalphad_version')}."
                            f"\n{CAUTION}", fontsize=7, color="0.35", va="bottom", ha="center",
                  transform=foot.transAxes)
        fig.draw_without_rendering()
        plot_solvus(ds, axes[0], units=units, temperature=temperature, labels=labels, legend=False,
                    title="linear composition axis")
        plot_solvus(ds, axes[1], units=units, temperature=temperature, log=True, labels=labels, legend=False,
                    annotate=False, title="logarithmic composition axis")
        if panels == 3:
            plot_arrhenius(ds, axes[2], T_range=T_range, labels=labels, legend=False)
    except BaseException:
        plt.close(fig)
        raise
    return fig


def save_solvus_figure(ds, path: str | Path, *, units: str = "wt%", temperature: str = "C",
                       T_range: tuple[float, float] | None = None,
                       labels: Mapping[str, str] | None = None) -> Path:
    """A report figure: linear and log solvus and the Arrhenius view, with provenance; written atomically.

    The format follows the file name's suffix (png, pdf, svg). A line without a single ``ok`` point has nothing
    to draw: `InputError` is raised and no file is written. With one point the Arrhenius panel is left out.
    """
    from solubility._io import atomic_write

    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in ("png", "pdf", "svg"):
        raise InputError(f"figure file {str(path)!r} must end in .png, .pdf or .svg")
    fig = solvus_figure(ds, units=units, temperature=temperature, T_range=T_range, labels=labels)
    try:
        return atomic_write(path, lambda tmp: fig.savefig(tmp, format=suffix, dpi=150, bbox_inches="tight"))
    finally:
        pyplot().close(fig)
