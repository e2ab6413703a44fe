"""The solvus Dataset schema, its exports and the `solubility solvus` command (design.md's contract)."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import solubility
from solubility.cli.main import main
from solubility.results.dataset import parse_temperatures, solvus_json, write_csv, write_netcdf

METASTABLE = ["GRAPHITE", "DIAMOND_A4"]


@pytest.fixture(scope="module")
def line():
    # 1200 K is outside the ferrite field: a null point among numbers
    return solubility.solvus("fe-c", "BCC_A2", "C", "900:1200:100", exclude=METASTABLE)


def test_every_variable_has_units_and_long_name(line):
    for name, var in line.variables.items():
        assert "units" in var.attrs, name
        assert var.attrs.get("long_name"), name


def test_attrs_are_flat_and_carry_provenance(line):
    for key, value in line.attrs.items():
        assert isinstance(value, str | int | float), key
    assert len(line.attrs["database_sha256"]) == 64
    assert line.attrs["site_ratios"] == "1:3"  # BCC_A2 (FE)1(C,VA)3 in the bundled database
    assert line.attrs["pycalphad_version"].startswith("0.11")
    assert "verify" in line.attrs["caution"]


def test_units_are_consistent(line):
    ok = line.status.values == "ok"
    x, w, y = line.X.values[ok], line.W.values[ok], line.Y.values[ok]
    m_c, m_fe = 12.011, 55.847  # molar masses declared in the database's ELEMENT lines
    np.testing.assert_allclose(w, x * m_c / (x * m_c + (1 - x) * m_fe), rtol=1e-12)
    np.testing.assert_allclose(line.PPM.values[ok], 1e6 * w, rtol=1e-12)
    np.testing.assert_allclose(x, 3 * y / (1 + 3 * y), rtol=1e-12)  # x = c y / (a + c y), a:c = 1:3


def test_null_point_is_not_a_number(line):
    i = list(line["T"].values).index(1200.0)
    assert line.status.values[i] == "host_unstable"
    assert all(math.isnan(float(line[v].values[i])) for v in ("X", "W", "PPM", "Y"))
    data = solvus_json(line)
    assert data["mole_fraction"][i] is None and data["partner_phases"][i] == []


def test_netcdf_round_trip(line, tmp_path):
    path = write_netcdf(line, tmp_path / "line.nc")
    back = xr.load_dataset(path, engine="h5netcdf")
    xr.testing.assert_allclose(back[["X", "W", "Y", "MU"]], line[["X", "W", "Y", "MU"]])
    assert list(back.partner.values.astype(str)) == list(line.partner.values.astype(str))
    assert back.attrs["database_sha256"] == line.attrs["database_sha256"]


def test_csv_has_a_row_per_temperature(line, tmp_path):
    text = write_csv(line, tmp_path / "line.csv").read_text()
    rows = [r for r in text.splitlines() if r and not r.startswith("#")]
    assert len(rows) == 1 + line.sizes["T"]
    assert rows[0].startswith("T [K],T_C [degC],X [1]")


@pytest.mark.parametrize(
    ("spec", "expected"),
    [("500:600:50", [500.0, 550.0, 600.0]), ("500:610:50", [500.0, 550.0, 600.0]), ("700", [700.0]),
     ("700, 800", [700.0, 800.0]), ([300, 400.5], [300.0, 400.5])],
)
def test_temperature_specs(spec, expected):
    np.testing.assert_allclose(parse_temperatures(spec), expected)


def test_cli_json_contract(capsys):
    rc = main(["solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--temperatures", "900:1200:300",
               "--exclude", "GRAPHITE", "--exclude", "DIAMOND_A4", "--json"])
    out = capsys.readouterr().out
    assert rc == 0
    data = json.loads(out)
    for key in ("temperature_K", "mole_fraction", "mass_fraction", "site_fraction", "partner_phases", "converged"):
        assert len(data[key]) == 2, key
    assert data["partner_phases"] == [["CEMENTITE_D011"], []]
    assert data["mole_fraction"][1] is None


def test_cli_writes_outputs_atomically_and_refuses_to_overwrite(tmp_path, capsys):
    args = ["solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--temperatures", "800:1000:100",
            "--exclude", "GRAPHITE,DIAMOND_A4", "--csv", str(tmp_path / "a.csv"),
            "--netcdf", str(tmp_path / "a.nc"), "--plot", str(tmp_path / "a.png")]
    assert main(args) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "a.nc", "a.png"]
    before = (tmp_path / "a.csv").read_bytes()
    capsys.readouterr()
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "exists already" in err
    assert (tmp_path / "a.csv").read_bytes() == before


def test_installed_command_runs(tmp_path):
    script = Path(sys.executable).parent / "solubility"  # the console script pip installed beside python
    exe = [str(script)] if script.exists() else [sys.executable, "-m", "solubility.cli.main"]
    res = subprocess.run([*exe, "solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--temperatures",
                          "800", "--exclude", "GRAPHITE,DIAMOND_A4", "--json"],
                         capture_output=True, text=True, timeout=600, check=False)
    assert res.returncode == 0, res.stderr
    assert json.loads(res.stdout)["partner_phases"] == [["CEMENTITE_D011"]]
