"""Failure injection in the solvus: one failing temperature gives a flagged point and a finished line.

A solver failure at one temperature (raised in the test hook of `solvus_line`, or deep inside the driving-force
optimisation of one phase) must not stop the line: that point is flagged (status "failed", converged False,
a reason, no number) and every other point is computed as in a run without the failure. An output that cannot
be written gives one clear line and leaves no partial file: exit status 2 when it is refused before the work (a
folder that is a regular file), 4 when writing fails (a full disk, a folder removed while the line is computed;
the README's exit statuses).

System: carbon in ferrite (BCC_A2) on the bundled Fe-C database (Hallstedt et al., Calphad 34 (2010) 129),
graphite and diamond excluded, 700-900 K, where the partner is cementite throughout (the metastable Fe-Fe3C
diagram: the ferrite/cementite solvus runs below the eutectoid at about 1000 K; common practice, no source
needed for the qualitative fact, and the tests compare runs with each other, not with a handbook).
"""

from __future__ import annotations

import errno
import json
import math
from pathlib import Path

import numpy as np
import pytest

from solubility.calc.boundary import solvus_line
from solubility.calc.host import prepare_host
from solubility.cli.main import main
from solubility.results.dataset import build_dataset, solvus_json
from solubility.thermo.system import BoundSystem

TEMPERATURES = (700.0, 750.0, 800.0, 850.0, 900.0)  # K
EXCLUDE = ("GRAPHITE", "DIAMOND_A4")
PARTNER = "CEMENTITE_D011"
#: after a failed point the next one starts from the last good point, two steps back instead of one; the
#: boundary solve stops at |DF| < 1e-9 J/mol or a step below 1e-12 in ln y (solubility.calc.boundary), so the two
#: starts agree to far better than this relative tolerance on x
RTOL_AFTER_FAILURE = 1e-7
CLI_ARGS = ["solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--temperatures", "700:900:50",
            "--exclude", ",".join(EXCLUDE)]  # fmt: skip


class InjectedError(ArithmeticError):
    """Raised by the tests, never by the tool."""


@pytest.fixture(scope="module")
def job():
    return prepare_host("fe-c", "BCC_A2", "C", exclude=EXCLUDE)


@pytest.fixture(scope="module")
def reference(job):
    """The line without any failure."""
    return build_dataset(solvus_line(job, TEMPERATURES), job)


def test_reference_line_is_all_ok(reference):
    """The injected runs are compared with this line, so it must hold a number and the partner everywhere."""
    assert list(reference["status"].values) == ["ok"] * len(TEMPERATURES)
    assert set(reference["partner"].values) == {PARTNER}


def _check_flagged_line(ds, reference, t_bad: float, reason: str) -> None:
    """The point at t_bad is flagged without a number; the others are ok and as in the reference line."""
    assert ds.sizes["T"] == len(TEMPERATURES)
    np.testing.assert_array_equal(ds["T"].values, reference["T"].values)
    k = TEMPERATURES.index(t_bad)
    bad = ds.isel(T=k)
    assert str(bad["status"].values) == "failed"
    assert not bool(bad["converged"].values)
    assert reason in str(bad["reason"].values)
    for var in ("X", "W", "PPM", "Y"):
        assert math.isnan(float(bad[var].values)), var
    assert str(bad["partner"].values) == ""
    good = [i for i in range(len(TEMPERATURES)) if i != k]
    assert list(ds["status"].values[good]) == ["ok"] * len(good)
    assert all(ds["converged"].values[good])
    assert list(ds["partner"].values[good]) == list(reference["partner"].values[good])
    before = [i for i in good if i < k]  # computed exactly as in the reference, from the same starts
    np.testing.assert_array_equal(ds["X"].values[before], reference["X"].values[before])
    np.testing.assert_allclose(ds["X"].values[good], reference["X"].values[good], rtol=RTOL_AFTER_FAILURE)
    np.testing.assert_allclose(ds["W"].values[good], reference["W"].values[good], rtol=RTOL_AFTER_FAILURE)
    record = solvus_json(ds)
    assert record["mole_fraction"][k] is None
    assert record["converged"][k] is False
    assert record["partner_phases"][k] == []
    assert all(record["mole_fraction"][i] is not None for i in good)


@pytest.mark.parametrize("t_bad", [700.0, 800.0, 900.0], ids=["first", "middle", "last"])
@pytest.mark.parametrize("error", [InjectedError, RuntimeError], ids=["arithmetic", "runtime"])
def test_hook_failure_flags_one_point(job, reference, t_bad, error):
    """A failure raised by the hook at one temperature: flagged point, finished line."""
    calls = []

    def hooks(temperature: float) -> None:
        calls.append(temperature)
        if temperature == t_bad:
            raise error(f"injected at {temperature:g} K")

    line = solvus_line(job, TEMPERATURES, hooks=hooks)
    assert sorted(calls) == sorted(TEMPERATURES)  # the hook ran at every temperature, the line went on
    _check_flagged_line(build_dataset(line, job), reference, t_bad, f"injected at {t_bad:g} K")


def _failing_driving_force(monkeypatch, phase: str, t_bad: float) -> list[float]:
    """Make BoundSystem.driving_force raise FloatingPointError for `phase` at `t_bad`; returns the hits."""
    real = BoundSystem.driving_force
    hits: list[float] = []

    def driving_force(self, name, mu, temperature, y0):
        if name == phase and temperature == t_bad:
            hits.append(temperature)
            raise FloatingPointError(f"overflow injected in {name} at {temperature:g} K")
        return real(self, name, mu, temperature, y0)

    monkeypatch.setattr(BoundSystem, "driving_force", driving_force)
    return hits


@pytest.mark.parametrize("t_bad", [700.0, 800.0], ids=["cold-start", "warm-start"])
def test_driving_force_failure_flags_one_point(job, reference, monkeypatch, t_bad):
    """FloatingPointError deep in the partner's driving force at one temperature: flagged point, finished line."""
    hits = _failing_driving_force(monkeypatch, PARTNER, t_bad)
    line = solvus_line(job, TEMPERATURES)
    assert hits, "the injected failure was never reached"
    _check_flagged_line(build_dataset(line, job), reference, t_bad, "overflow injected")


def test_cli_finishes_line_with_flagged_point(monkeypatch, tmp_path, capsys, reference):
    """The command keeps the flagged point: exit 0, JSON null at that T, the CSV written whole."""
    hits = _failing_driving_force(monkeypatch, PARTNER, 800.0)
    csv = tmp_path / "line.csv"
    status = main([*CLI_ARGS, "--json", "--csv", str(csv)])
    out, err = capsys.readouterr()
    assert status == 0, err
    assert hits
    record = json.loads(out)
    k = TEMPERATURES.index(800.0)
    assert record["temperature_K"] == list(TEMPERATURES)
    assert record["mole_fraction"][k] is None and record["converged"][k] is False
    assert record["status"][k] == "failed" and "overflow injected" in record["reason"][k]
    good = [i for i in range(len(TEMPERATURES)) if i != k]
    np.testing.assert_allclose([record["mole_fraction"][i] for i in good], reference["X"].values[good],
                               rtol=RTOL_AFTER_FAILURE)
    rows = [ln for ln in csv.read_text(encoding="utf-8").splitlines() if ln and not ln.startswith("#")]
    assert len(rows) == 1 + len(TEMPERATURES)  # header and one row per temperature: the file is whole
    assert ",failed," in rows[1 + k]


# ---------------------------------------------------------------------------------------------- outputs
def _no_partial_files(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".part"))


def test_output_inside_regular_file_is_refused_before_work(monkeypatch, tmp_path, capsys):
    """--csv into a path whose folder is a regular file: one line, exit 2, nothing computed or written."""
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a regular file\n", encoding="utf-8")
    computed = []
    monkeypatch.setattr("solubility.calc.boundary.solvus_line", lambda *a, **k: computed.append(1))
    status = main([*CLI_ARGS, "--csv", str(blocker / "line.csv")])
    out, err = capsys.readouterr()
    assert status == 2 and out == ""
    assert len(err.splitlines()) == 1 and "not-a-folder" in err
    assert not computed
    assert sorted(p.name for p in tmp_path.iterdir()) == ["not-a-folder"]
    assert blocker.read_text(encoding="utf-8") == "a regular file\n"


@pytest.mark.parametrize("option, name", [("--csv", "line.csv"), ("--netcdf", "line.nc")])
@pytest.mark.parametrize("existing", [False, True], ids=["new", "overwrite"])
def test_disk_full_while_writing(monkeypatch, tmp_path, capsys, option, name, existing):
    """ENOSPC at the flush of the output: one line naming the file, exit 4, no partial file, old file kept."""
    out_path = tmp_path / name
    if existing:
        out_path.write_bytes(b"the previous result\n")

    def fsync(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr("solubility._io.os.fsync", fsync)
    argv = [*CLI_ARGS, option, str(out_path)] + (["--overwrite"] if existing else [])
    status = main(argv)
    out, err = capsys.readouterr()
    assert status == 4, err
    assert out == ""
    assert len(err.splitlines()) == 1
    assert "No space left on device" in err and name in err
    assert _no_partial_files(tmp_path) == []
    if existing:
        assert out_path.read_bytes() == b"the previous result\n"
    else:
        assert not out_path.exists()


def test_output_folder_removed_during_the_run(monkeypatch, tmp_path, capsys):
    """The output folder exists at the check but is gone when the line is written: one line, exit 4."""
    folder = tmp_path / "results"
    folder.mkdir()
    real = solvus_line

    def line_then_remove_folder(*args, **kwargs):
        result = real(*args, **kwargs)
        folder.rmdir()
        return result

    monkeypatch.setattr("solubility.calc.boundary.solvus_line", line_then_remove_folder)
    status = main([*CLI_ARGS, "--csv", str(folder / "line.csv")])
    out, err = capsys.readouterr()
    assert status == 4, err
    assert out == ""
    assert len(err.splitlines()) == 1 and "line.csv" in err
    assert not folder.exists()
