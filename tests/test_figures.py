"""Report figures: the README's figures and awkward cases, checked with matplotlib's own text extents.

What is asserted on every panel (and inset) of the report figure: no two tick labels overlap; every placed text
lies inside its axes and covers no data point; every partner is in the legend; every segment is visible (at
least 10 pixels wide on the linear panel or on its enlarged inset). The awkward lines are invented data (a
solvus Dataset built by hand with `solubility.results.summary.add_summary`), labelled as such; the README's
figures are computed on the bundled Fe-C database.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import solubility
from solubility.errors import InputError
from solubility.results._layout import pyplot, text_box
from solubility.results.plotting import plot_arrhenius, plot_solvus, save_solvus_figure, solvus_figure
from solubility.results.summary import add_summary

plt = pyplot()
METASTABLE = ["GRAPHITE", "DIAMOND_A4"]
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), the 8-byte file signature
M_C, M_FE = 12.011, 55.847  # molar masses of the bundled Fe-C database's ELEMENT lines


def invented(T, X, partners, changes=()):
    """An invented solvus Dataset (not a reference value): T in K, X mole fractions, one partner per point;
    changes as (T, X, below, above)."""
    T, X = np.asarray(T, float), np.asarray(X, float)
    W = X * M_C / (X * M_C + (1 - X) * M_FE)
    ch = np.array([c[:2] for c in changes], float).reshape(-1, 2)
    cw = ch[:, 1] * M_C / (ch[:, 1] * M_C + (1 - ch[:, 1]) * M_FE)
    ds = xr.Dataset(
        {"X": ("T", X, {"units": "1"}), "W": ("T", W, {"units": "1"}), "PPM": ("T", W * 1e6, {"units": "ppm"}),
         "Y": ("T", X / 3, {"units": "1"}), "partner": ("T", np.array(partners, dtype=object)),
         "status": ("T", np.array(["ok"] * T.size, dtype=object)),
         "reason": ("T", np.array([""] * T.size, dtype=object)),
         "partner_change_T": ("change", ch[:, 0]), "partner_change_X": ("change", ch[:, 1]),
         "partner_change_W": ("change", cw), "partner_change_PPM": ("change", cw * 1e6),
         "partner_below": ("change", np.array([c[2] for c in changes], dtype=object)),
         "partner_above": ("change", np.array([c[3] for c in changes], dtype=object))},
        coords={"T": ("T", T, {"units": "K"})},
        attrs={"solute": "C", "phase": "HOST", "database": "invented", "database_sha256": "0" * 64,
               "pressure_Pa": 101325.0})
    return add_summary(ds)


@pytest.fixture(scope="module")
def ferrite():
    """The README's main job (Set-up): three partners, the M7C3 segment at about 1e-6 wt%."""
    return solubility.solvus("fe-c", "BCC_A2", "C", "500:1150:10", exclude=METASTABLE)


@pytest.fixture(scope="module")
def austenite():
    """The README's austenite example: a log panel over less than one decade (0.8 to 2 wt%)."""
    return solubility.solvus("fe-c", "FCC_A1", "C", "1000:1450:25", exclude=METASTABLE)


def _tiny_beside_large():
    T = np.arange(500.0, 800.0, 10.0)
    # invented: continuous at the change (595 K), rising from about 1e-5 wt% to about 1e-2 wt%
    X = np.where(T < 600, 4.6e-7 * np.exp((T - 500) / 60), 2.23e-6 * np.exp((T - 595) / 36))
    partners = np.where(T < 600, "LOW", "HIGH")
    return invented(T, X, partners, [(595.0, 4.6e-7 * np.exp(95 / 60), "LOW", "HIGH")])


AWKWARD = {
    # 1.0 to 1.2 wt%-ish: far less than a decade on the log panel (invented)
    "narrow log range": lambda: invented(np.arange(900.0, 1000.0, 10.0), np.linspace(0.046, 0.054, 10),
                                         ["P"] * 10),
    # a segment at 1e-5 wt% beside one at 1e-2 wt% (invented)
    "tiny beside large": _tiny_beside_large,
    "single point": lambda: invented([800.0], [1e-3], ["P"]),
    # three partners, each change located (invented)
    "three partners": lambda: invented(np.arange(600.0, 900.0, 20.0), np.geomspace(1e-5, 1e-3, 15),
                                       ["A"] * 5 + ["B"] * 5 + ["C"] * 5,
                                       [(690.0, 4.2e-5, "A", "B"), (790.0, 2.1e-4, "B", "C")]),
}


def _data_points(ax) -> np.ndarray:
    pts = [ax.transData.transform(line.get_xydata()) for line in ax.get_lines()
           if line.get_gid() != "guide" and line.get_marker() not in ("None", None, "")]
    return np.vstack(pts) if pts else np.empty((0, 2))


def _tick_labels(axis, lo, hi):
    return [t.label1 for t in axis.get_major_ticks() if lo <= t.get_loc() <= hi and t.label1.get_visible()
            and t.label1.get_text()]


def check_axes(ax) -> None:
    """No overlapping tick labels; every text inside the axes and off the data points."""
    renderer = ax.figure.canvas.get_renderer()
    for axis, lim in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
        boxes = [t.get_window_extent(renderer) for t in _tick_labels(axis, *sorted(lim))]
        assert len(boxes) >= 2, f"{ax.get_title()}: fewer than two tick labels"
        for i, a in enumerate(boxes):
            for b in boxes[i + 1:]:
                assert not a.overlaps(b), f"{ax.get_title()}: tick labels overlap"
    frame = ax.get_window_extent(renderer)
    points = _data_points(ax)
    for text in ax.texts:
        box = text_box(text, renderer)
        assert box.x0 >= frame.x0 - 1 and box.x1 <= frame.x1 + 1 and box.y0 >= frame.y0 - 1 \
            and box.y1 <= frame.y1 + 1, f"{text.get_text()!r} leaves the axes"
        inside = ((points[:, 0] > box.x0) & (points[:, 0] < box.x1) & (points[:, 1] > box.y0)
                  & (points[:, 1] < box.y1))
        assert not inside.any(), f"{text.get_text()!r} covers a data point"


def check_figure(fig, ds) -> None:
    fig.canvas.draw()
    axes = [a for a in fig.axes if a.axison]
    for ax in axes + [c for a in axes for c in a.child_axes]:  # the panels and their insets
        check_axes(ax)
    legend_texts = [t.get_text() for leg in (a.get_legend() for a in fig.axes) if leg for t in leg.get_texts()]
    partners = {str(p) for p, s in zip(ds.partner.values, ds.status.values, strict=True) if s == "ok"}
    for partner in partners:
        assert any(partner in t for t in legend_texts), f"{partner} is not in the legend"
    linear = axes[0]
    insets = linear.child_axes
    for partner in partners:  # every segment at least 10 px wide on the linear panel or on its inset
        widths = [np.ptp(a.transData.transform(line.get_xydata())[:, 0]) for a in [linear, *insets]
                  for line in a.get_lines() if line.get_label().endswith(partner) or
                  line.get_color() == _colour(linear, partner)]
        assert max(widths, default=0.0) >= 10.0 or ds.sizes["T"] == 1, f"{partner} segment is not visible"


def _colour(ax, partner):
    for line in ax.get_lines():
        if line.get_label().endswith(f"+ {partner}"):
            return line.get_color()
    return None


@pytest.mark.parametrize("name", sorted(AWKWARD))
def test_awkward_figures_are_readable(name):
    ds = AWKWARD[name]()
    fig = solvus_figure(ds)
    try:
        check_figure(fig, ds)
        assert len([a for a in fig.axes if a.axison]) == (2 if name == "single point" else 3)
    finally:
        plt.close(fig)


def test_tiny_segment_gets_an_inset():
    ds = AWKWARD["tiny beside large"]()
    fig = solvus_figure(ds)
    try:
        fig.canvas.draw()
        (inset,) = fig.axes[0].child_axes
        _, hi = inset.get_xlim()
        assert hi < 0.001  # wt%: the inset shows the 1e-5 wt% segment, not the 1e-2 wt% one
    finally:
        plt.close(fig)


def test_readme_ferrite_figure(ferrite, tmp_path):
    fig = solvus_figure(ferrite, labels={"BCC_A2": "ferrite"})
    try:
        check_figure(fig, ferrite)
        texts = [t.get_text() for a in fig.axes for t in a.texts]
        # the eutectoid: the most carbon ferrite holds, with composition and temperature, rounded
        assert any(t.startswith("most C: 0.0191 wt%") and "727 °C" in t for t in texts)
        assert any("apparent enthalpy of solution Q = 74.9 kJ/mol" in t and "pre-factor A" in t for t in texts)
        assert fig.axes[2].get_xlabel() == "10³ K / T"
        titles = [a.get_title() for a in fig.axes if a.get_title()]
        assert len(titles) == len(set(titles))  # titles said once
        legend = [t.get_text() for t in fig.axes[3].get_legend().get_texts()]
        assert legend == ["ferrite + M7C3_D101", "ferrite + CEMENTITE_D011", "ferrite + FCC_A1"]
    finally:
        plt.close(fig)
    path = save_solvus_figure(ferrite, tmp_path / "ferrite.png", labels={"BCC_A2": "ferrite"})
    assert path.read_bytes()[:8] == PNG_SIGNATURE and [p.name for p in tmp_path.iterdir()] == ["ferrite.png"]


def test_readme_austenite_figure_has_plain_ticks_on_a_narrow_log_axis(austenite):
    fig = solvus_figure(austenite)
    try:
        check_figure(fig, austenite)
        log = fig.axes[1]
        labels = [t.get_text() for t in _tick_labels(log.xaxis, *log.get_xlim())]
        assert len(labels) >= 3 and all("10^" not in t for t in labels)
    finally:
        plt.close(fig)


def test_nothing_to_draw_writes_nothing(tmp_path):
    ds = AWKWARD["single point"]()
    ds["status"] = ("T", np.array(["host_unstable"], dtype=object))
    with pytest.raises(InputError, match="nothing to draw"):
        save_solvus_figure(ds, tmp_path / "empty.png")
    assert list(tmp_path.iterdir()) == []


def test_single_axes_functions_keep_their_contract(ferrite):
    ax = plot_solvus(ferrite, units="ppm", temperature="K")
    assert "ppm" in ax.get_xlabel() and ax.get_ylabel() == "temperature, K"
    assert [t.get_text() for t in ax.get_legend().get_texts()] == [
        "BCC_A2 + M7C3_D101", "BCC_A2 + CEMENTITE_D011", "BCC_A2 + FCC_A1"]
    plt.close(ax.figure)
    ax = plot_arrhenius(ferrite, T_range=(600.0, 900.0))
    assert any("600-900 K" in t.get_text() and "kJ/mol" in t.get_text() for t in ax.texts)
    plt.close(ax.figure)
    with pytest.raises(InputError, match="different partners"):
        plot_arrhenius(ferrite, T_range=(500.0, 900.0))
    plt.close("all")
