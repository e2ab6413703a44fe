"""The numbers people quote: the most solute on the line and the Arrhenius fit, in the Dataset, JSON, CSV and
table, checked against an independent numpy fit of the tool's own points and the Fe-C handbook values.

Handbook: H. Okamoto, J. Phase Equilib. 13 (1992) 543 (the Fe-C diagram): metastable eutectoid 727 C with
0.022 wt% C in ferrite; the tolerances are those of tests/test_solvus_fe_c_handbook.py (3 K, 0.004 wt%).
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest

import solubility
from solubility.cli.main import main
from solubility.results.dataset import csv_text, solvus_json
from solubility.results.summary import R, add_summary, arrhenius_fit

METASTABLE = ["GRAPHITE", "DIAMOND_A4"]


@pytest.fixture(scope="module")
def line():
    return solubility.solvus("fe-c", "BCC_A2", "C", "500:1100:20", exclude=METASTABLE)


def _numpy_fit(T, x):
    """Independent least squares of ln x = ln A - Q/(R T) with numpy.linalg.lstsq."""
    M = np.column_stack([np.ones_like(T), -1.0 / (R * T)])
    (lnA, Q), *_ = np.linalg.lstsq(M, np.log(x), rcond=None)
    pred = M @ np.array([lnA, Q])
    r2 = 1 - np.sum((np.log(x) - pred) ** 2) / np.sum((np.log(x) - np.log(x).mean()) ** 2)
    return Q, np.exp(lnA), r2


def test_extreme_is_the_eutectoid_of_the_handbook(line):
    data = solvus_json(line)
    ext = data["extreme"]
    assert ext["partner"] == "CEMENTITE_D011|FCC_A1" and ext["at_range_end"] is False
    assert abs(ext["temperature_K"] - 273.15 - 727.0) <= 3.0  # Okamoto 1992: 727 C
    assert abs(ext["wt_percent"] - 0.022) <= 0.004  # Okamoto 1992: 0.022 wt% in ferrite
    # the extreme is the located change, not a grid point, and it is the largest x of the line
    (change,) = [c for c in data["partner_changes"] if c["above"] == ["FCC_A1"]]
    assert ext["mole_fraction"] == change["mole_fraction"] and ext["ppm"] == pytest.approx(1e4 * ext["wt_percent"])
    assert ext["mole_fraction"] >= np.nanmax(line.X.values)


def test_fit_matches_an_independent_numpy_fit(line):
    fit = solvus_json(line)["fit"]
    ok = (line.status.values == "ok") & (line.partner.values == fit["partner"])
    T, x = line.T.values[ok], line.X.values[ok]
    assert fit["points"] == ok.sum() and fit["T_min_K"] == T.min() and fit["T_max_K"] == T.max()
    Q, A, r2 = _numpy_fit(T, x)
    # two least-squares solvers on the same 2x2 problem agree to rounding; 1e-9 relative is far above it
    assert fit["Q_kJ_per_mol"] * 1e3 == pytest.approx(Q, rel=1e-9)
    assert fit["prefactor"] == pytest.approx(A, rel=1e-8)
    assert fit["R2"] == pytest.approx(r2, rel=1e-9)
    assert 60 < fit["Q_kJ_per_mol"] < 90  # the README's 74.9 kJ/mol against cementite, to its first digit


def test_fit_range_is_honoured_and_checked(line):
    ds = add_summary(line, (600.0, 900.0))
    T = line.T.values
    sel = (T >= 600) & (T <= 900)
    Q, _, _ = _numpy_fit(T[sel], line.X.values[sel])
    assert float(ds.fit_Q) == pytest.approx(Q, rel=1e-9) and float(ds.fit_T_min) == 600.0
    with pytest.raises(solubility.errors.InputError, match="different partners"):
        arrhenius_fit(line, (900.0, 1100.0))


def test_csv_carries_wt_percent_extreme_and_fit_in_full_precision(line):
    text = csv_text(line)
    comments = {ln.split(":")[0][2:]: ln.split(": ", 1)[1] for ln in text.splitlines() if ln.startswith("# ")}
    assert float(comments["extreme_X [1]"].split()[0]) == float(line.extreme_X)
    assert float(comments["fit_Q [J/mol]"].split()[0]) == float(line.fit_Q)
    rows = list(csv.reader(io.StringIO("\n".join(ln for ln in text.splitlines() if not ln.startswith("#")))))
    head = rows[0]
    assert "W_percent [wt%]" in head
    for row in rows[1:]:
        if row[head.index("status")] == "ok":
            w = float(row[head.index("W [1]")])
            assert float(row[head.index("W_percent [wt%]")]) == pytest.approx(100 * w, rel=1e-15)
    assert rows[1][head.index("T_C [degC]")] == "226.85"  # no 226.85000000000002


def test_csv_quotes_a_reason_as_one_field(line):
    bad = line.copy()
    reasons = bad.reason.values.copy()
    reasons[0] = 'solver failed: KeyError("FE", 3)'
    bad["reason"] = ("T", reasons)
    rows = [r for r in csv.reader(io.StringIO(csv_text(bad))) if r and not r[0].startswith("#")]
    assert {len(r) for r in rows} == {len(rows[0])}
    assert rows[1][rows[0].index("reason")] == 'solver failed: KeyError("FE", 3)'


def test_cli_table_and_json_quote_the_numbers(capsys):
    args = ["solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--temperatures", "900:1050:10",
            "--exclude", "GRAPHITE,DIAMOND_A4"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "compositions to 4 significant digits" in out
    change = next(ln for ln in out.splitlines() if ln.startswith("partner changes at"))
    assert "wt%" in change and "ppm" in change and "x = " in change
    assert any(ln.startswith("most C on the line:") for ln in out.splitlines())
    assert any("apparent enthalpy of solution Q =" in ln and "pre-factor" in ln for ln in out.splitlines())
    rows = [ln.split() for ln in out.splitlines()[2:] if ln[:9].strip().replace(".", "").isdigit()]
    ppm_cells = [r[4] for r in rows if r[-1] in ("CEMENTITE_D011", "FCC_A1")]
    assert ppm_cells and all("e" not in c for c in ppm_cells)  # one notation in the column
    assert {len(c.replace(".", "").lstrip("0")) for c in ppm_cells} == {4}  # 4 significant digits each
    assert main([*args, "--json", "--fit-range", "900:990"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["fit"]["T_min_K"] == 900.0 and data["fit"]["T_max_K"] == 990.0
    assert data["partner_changes"][0]["wt_percent"] == pytest.approx(data["extreme"]["wt_percent"])
