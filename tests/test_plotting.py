"""Figures: the solvus and Arrhenius views are drawn from the Dataset with labelled segments and units."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt
import pytest

import solubility
from solubility.errors import InputError
from solubility.results.plotting import plot_arrhenius, plot_solvus, save_solvus_figure


@pytest.fixture(scope="module")
def line():
    return solubility.solvus("fe-c", "BCC_A2", "C", "900:1100:25", exclude=["GRAPHITE", "DIAMOND_A4"])


def test_one_labelled_segment_per_partner(line):
    ax = plot_solvus(line, units="ppm", temperature="K")
    labels = ax.get_legend_handles_labels()[1]
    assert labels == ["BCC_A2 + CEMENTITE_D011", "BCC_A2 + FCC_A1"]
    assert "ppm" in ax.get_xlabel() and ax.get_ylabel() == "temperature, K"
    # each segment runs on to the located eutectoid, so the two meet there
    (T_star,) = line.partner_change_T.values
    ends = [ln.get_ydata() for ln in ax.get_lines()[:2]]
    assert any(abs(max(e) - T_star) < 1e-9 for e in ends) and any(abs(min(e) - T_star) < 1e-9 for e in ends)
    plt.close(ax.figure)


def test_arrhenius_view_states_the_fit(line):
    ax = plot_arrhenius(line)
    assert any("kJ/mol" in t.get_text() and "pre-factor" in t.get_text() for t in ax.texts)
    plt.close(ax.figure)


def test_report_figure_is_written_whole(line, tmp_path):
    path = save_solvus_figure(line, tmp_path / "fig.png")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in tmp_path.iterdir()] == ["fig.png"]  # no temporary file left
    with pytest.raises(InputError, match="must end in"):
        save_solvus_figure(line, tmp_path / "fig.bmp")
    with pytest.raises(InputError, match="units"):
        plot_solvus(line, units="mol%")
