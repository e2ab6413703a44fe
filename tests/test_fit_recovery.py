"""Fitting: recovery of a known end-member from pycalphad's own equilibrium, and bad data files.

Reference data: tests/data/fe_c_ferrite_pycalphad.csv, the BCC_A2 composition in equilibrium with CEMENTITE_D011
computed by pycalphad 0.11.2 `equilibrium` (reference library) on the bundled fe-c database (cfe_broshe.tdb,
Hallstedt et al., Calphad 34 (2010) 129), whose G(BCC_A2,FE:C;0) holds A = 322050 J/mol and B = 75.667 J/(mol K).
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest

from solubility.cli.main import main

DATA = Path(__file__).parent / "data" / "fe_c_ferrite_pycalphad.csv"
EXCLUDE = ("GRAPHITE", "DIAMOND_A4", "FCC_A1", "HCP_A3", "LIQUID", "M7C3_D101")  # as the data were generated
FREE = ("G(BCC_A2,FE:C;0)=GA2FE#+3*GA9C#+A+B*T+IGPA2FC#+3*R#*T*LN(IEA2FE#)-3*R#*T*LN(IE0A2FE#)"
        "+9*R#*T*LN(IEA2C#)-9*R#*T*LN(IE0A2C#)")
A_TRUE, B_TRUE = 322050.0, 75.667


def test_recovers_a_and_b_noise_free():
    from solubility.api import fit

    res = fit(DATA, "fe-c", "BCC_A2", "C", FREE, start={"A": 300000.0, "B": 70.0}, exclude=EXCLUDE)
    d = res.to_dict()
    # 1e-6 relative (issue 11): pycalphad's equilibrium and the exact engine agree far better than that here
    assert d["parameters"]["A"]["value"] == pytest.approx(A_TRUE, rel=1e-6)
    assert d["parameters"]["B"]["value"] == pytest.approx(B_TRUE, rel=1e-6)
    assert d["n_points"] == 8 and res.converged
    assert set(d) >= {"parameters", "covariance", "residuals", "chi2", "n_points", "aic", "bic"}


def test_recovers_within_standard_errors_with_noise(tmp_path):
    # 5 % relative Gaussian noise (seeded, invented noise on the reference points), sigma_rel = 0.05 given:
    # the true values lie within 3 reported standard errors (a 99.7 % band for each, if the errors are right)
    from solubility.api import fit

    rng = np.random.default_rng(11)
    rows = list(csv.DictReader(DATA.read_text(encoding="utf-8").splitlines()))
    path = tmp_path / "noisy.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["T_K", "x", "sigma_rel"])
        for r in rows:
            w.writerow([r["T_K"], float(r["x"]) * float(np.exp(0.05 * rng.standard_normal())), 0.05])
    res = fit(path, "fe-c", "BCC_A2", "C", FREE, start={"A": 300000.0, "B": 70.0}, exclude=EXCLUDE)
    d = res.to_dict()["parameters"]
    assert abs(d["A"]["value"] - A_TRUE) < 3 * d["A"]["stderr"]
    assert abs(d["B"]["value"] - B_TRUE) < 3 * d["B"]["stderr"]
    assert 0 < d["A"]["stderr"] < 0.1 * A_TRUE  # finite and informative


@pytest.mark.parametrize(
    ("content", "free", "message"),
    [
        ("x\n0.001\n", FREE, "T_K is missing"),
        ("T_K,x\n800,-0.001\n", FREE, "above zero"),
        ("T_K,x,partner\n800,0.0001,NOSUCH_PHASE\n", FREE, "partner 'NOSUCH_PHASE'"),
        ("T_K,x\n800,0.0001\n", "G(BCC_A2,FE:C;0)=GA2FE#+3*GA9C#+322050", "no free symbol"),
        ("T_K,x,p_Pa\n800,0.0001,1e5\n", FREE, "no diatomic gas"),
    ],
    ids=["missing-column", "negative-x", "unknown-partner", "no-free-symbol", "carbon-has-no-gas"],
)
def test_bad_data_files_one_line_exit_2(tmp_path, capsys, content, free, message):
    path = tmp_path / "bad.csv"
    path.write_text(content, encoding="utf-8")
    code = main(["fit", str(path), "--database", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--free", free,
                 "--start", "A=300000", "--start", "B=70", "--exclude", ",".join(EXCLUDE)])
    err = capsys.readouterr().err
    assert code == 2
    assert message in err and len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_cli_json_and_plot(tmp_path, capsys):
    plot = tmp_path / "fit.png"
    code = main(["fit", str(DATA), "--database", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--free", FREE,
                 "--start", "A=300000", "--start", "B=70", "--exclude", ",".join(EXCLUDE),
                 "--json", "--plot", str(plot)])
    assert code == 0
    d = json.loads(capsys.readouterr().out)
    assert d["parameters"]["A"]["value"] == pytest.approx(A_TRUE, rel=1e-6)
    assert plot.stat().st_size > 1000
