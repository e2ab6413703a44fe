"""Uptake cases in a sweep job: the same numbers as `solubility.uptake`, resumable, bad keys refused before work.

References: each case's numbers are checked against `solubility.uptake` called directly on the same database
(the same computation, so 1e-12 relative), and the solvus case against `solubility.solvus`.
"""

from __future__ import annotations

import numpy as np
import pytest

import solubility
from solubility.cli.main import main
from solubility.sweeps.job import read_job
from solubility.sweeps.run import sweep

T = [1100.0, 1200.0, 1300.0]
JOB = """
[defaults]
database = "fe-c"
phase = "FCC_A1"
solute = "C"
temperatures = [1100, 1200, 1300]

[[case]]
name = "solvus"

[[product]]
name = "uptake-a{activity}"
kind = "uptake"
[product.vary]
activity = [0.2, 0.5]
"""


@pytest.fixture(scope="module")
def job(tmp_path_factory):
    path = tmp_path_factory.mktemp("uptake-job") / "job.toml"
    path.write_text(JOB)
    return path


def test_uptake_cases_equal_uptake_called_directly_and_resume_runs_nothing(job, tmp_path):
    cases = read_job(job)
    assert [(c.name, c.kind, c.activity) for c in cases] == [
        ("solvus", "solvus", None), ("uptake-a0.2", "uptake", 0.2), ("uptake-a0.5", "uptake", 0.5)]
    store = tmp_path / "store"
    ds = sweep(cases, workers=0, store=store)
    assert ds["case_status"].values.tolist() == ["ok"] * 3
    assert ds["kind"].values.tolist() == ["solvus", "uptake", "uptake"]
    for name, a in (("uptake-a0.2", 0.2), ("uptake-a0.5", 0.5)):
        direct = solubility.uptake("fe-c", "FCC_A1", "C", T, activity=a)
        one = ds.sel(case=name)
        for var in ("X", "W", "Y", "activity", "MU_SOLUTE"):
            np.testing.assert_allclose(one[var].values, direct[var].values, rtol=1e-12)
        assert one["status"].values.tolist() == direct["status"].values.tolist()
    direct = solubility.solvus("fe-c", "FCC_A1", "C", T)
    np.testing.assert_allclose(ds.sel(case="solvus")["X"].values, direct["X"].values, rtol=1e-12)
    # the activity is 0.2 and 0.5 by construction: the surroundings set it (a check of the plumbing)
    np.testing.assert_allclose(ds.sel(case="uptake-a0.2")["activity"].values, 0.2, rtol=1e-9)
    calls = []
    again = sweep(cases, workers=0, store=store, resume=True, progress=lambda *a: calls.append(a))
    assert calls == [(3, 3, None, "start")]  # every case came from the store: nothing ran again
    for name in ("uptake-a0.2", "uptake-a0.5", "solvus"):
        np.testing.assert_array_equal(again.sel(case=name)["X"].values, ds.sel(case=name)["X"].values)


def test_cli_json_and_csv_hold_both_kinds(job, tmp_path, capsys):
    out = tmp_path / "out.csv"
    assert main(["sweep", str(job), "--workers", "0", "--json", "--csv", str(out)]) == 0
    import json

    cases = json.loads(capsys.readouterr().out)["cases"]
    assert [c["status"] for c in cases] == ["ok"] * 3
    assert cases[1]["activity"] == pytest.approx([0.2] * 3, rel=1e-9) and "partner_changes" in cases[0]
    assert main(["sweep", str(job), "--workers", "0", "--quiet"]) == 0
    table = {line.split()[0]: line.split() for line in capsys.readouterr().out.splitlines()}
    assert table["uptake-a0.2"][1:4] == ["ok", "3", "3"]  # three points, each with a number
    rows = out.read_text().splitlines()
    assert len(rows) == 1 + 3 * 3 and "kind" in rows[0].split(",")


@pytest.mark.parametrize(("text", "message"), [
    ('kind = "uptake"\nactivity = 0.5\npartial_pressure = 1e4',
     "case 1 ('bad'): key 'partial_pressure': give exactly one of activity, partial_pressure or atmosphere"),
    ("activity = 0.5", "case 1 ('bad'): key 'activity': applies to uptake cases only"),
    ('kind = "uptake"\nactivity = 0', "case 1 ('bad'): key 'activity': activity 0 is not accepted"),
])
def test_bad_uptake_keys_fail_before_any_work(tmp_path, capsys, text, message):
    path = tmp_path / "bad.toml"
    path.write_text('[[case]]\nname = "bad"\ndatabase = "no-such-database.tdb"\nphase = "FCC_A1"\nsolute = "C"\n'
                    f'temperatures = [1000]\n{text}\n')
    assert main(["sweep", str(path), "--store", str(tmp_path / "store"), "--json"]) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and not (tmp_path / "store").exists()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and message in lines[0], captured.err
