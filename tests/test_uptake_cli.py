"""The uptake command in process: JSON keys of the contract, CSV and figure outputs, a metastable flag.

The numbers are checked elsewhere (test_uptake_fe_c against the graphite solvus and pycalphad); here the
contract: the `solvus` keys that apply plus `activity` and `forms_instead`, and what the files hold.
"""

from __future__ import annotations

import json

import numpy as np

import solubility
from solubility.cli.main import main


def test_json_contract(capsys):
    assert main(["uptake", "fe-c", "--phase", "FCC_A1", "--solute", "C", "--temperatures", "1000,1200",
                 "--activity", "1", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    for key in ("temperature_K", "mole_fraction", "mass_fraction", "site_fraction", "status", "reason",
                "activity", "forms_instead"):
        assert len(out[key]) == 2, key
    assert out["status"] == ["metastable", "ok"]
    assert "BCC_A2" in out["forms_instead"][0] and out["forms_instead"][1] == []
    sv = solubility.solvus("fe-c", "FCC_A1", "C", [1200.0])
    np.testing.assert_allclose(out["mole_fraction"][1], sv.X.values[0], rtol=1e-9)
    assert out["reference"] == "GRAPHITE"


def test_carburising_atmosphere_table_csv_and_figure(tmp_path, capsys):
    csv, png = tmp_path / "c.csv", tmp_path / "c.png"
    assert main(["uptake", "fe-c", "--phase", "FCC_A1", "--solute", "C", "--temperatures", "1150:1250:50",
                 "--atmosphere", "CO=0.2e5,CO2=0.004e5", "--csv", str(csv), "--plot", str(png)]) == 0
    text = capsys.readouterr().out
    assert "2 CO = C + CO2 (mixture as given)" in text and "NASA" in text
    rows = [r for r in csv.read_text().splitlines() if not r.startswith("#")]
    assert rows[0].startswith("T [K],T_C [degC],X [1]") and len(rows) == 4
    assert png.stat().st_size > 10000


def test_atmosphere_carbon_activity_is_boudouard():
    # a_C = p(CO)^2 / (p(CO2) p0) exp(-dG/RT) for 2 CO = C + CO2: the reported activity must equal the one from
    # the NASA data for CO and CO2 and the database's graphite (independent route through G's)
    from pycalphad import calculate

    from solubility.databases.reader import load_database
    from solubility.thermo.gas import nasa_gibbs

    T, R = 1200.0, 8.3145
    ds = solubility.uptake("fe-c", "FCC_A1", "C", [T], atmosphere={"CO": 0.2e5, "CO2": 0.004e5})
    g_gr = float(calculate(load_database("fe-c").db, ["C"], "GRAPHITE", T=T, P=101325, N=1).GM.values.squeeze())
    dG = g_gr + nasa_gibbs("CO2", T) - 2 * nasa_gibbs("CO", T)
    a_ref = 0.2 ** 2 / 0.004 * np.exp(-dG / (R * T))
    np.testing.assert_allclose(ds.activity.values[0], a_ref, rtol=1e-9)
    np.testing.assert_allclose(ds.derived.values[0], a_ref, rtol=1e-9)
