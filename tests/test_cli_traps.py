"""A command line without traps, and output channels that fail in one line.

Each trap of issue 12 and each output-channel case of issue 13 has a test: repeatable options cannot swallow
the positional; a temperature spec may start with a minus sign; errors show the working spelling; a line with
nothing to draw writes no figure and exits 3; a full standard output exits 4 in one line; an ASCII console
gets ASCII; an unwritable HOME does not break matplotlib; the misfit estimate knows its range.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from solubility.cli.main import main

ROOT = Path(__file__).resolve().parent.parent
BASE = ["solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C"]


def _run(args, **env):
    return subprocess.run([sys.executable, "-m", "solubility.cli.main", *args], capture_output=True, text=True,
                          timeout=600, cwd=env.pop("cwd", None), env={**os.environ, "PYTHONPATH": str(ROOT), **env})


def test_exclude_cannot_swallow_the_database(capsys):
    rc = main(["solvus", "--exclude", "GRAPHITE", "DIAMOND_A4", "fe-c", "--phase", "BCC_A2", "--solute", "C",
               "--temperatures", "900"])
    err = capsys.readouterr().err
    assert rc == 2 and err.count("\n") == 1
    assert "--exclude A,B" in err  # the working spelling is shown


@pytest.mark.parametrize("exclude", [["--exclude", "GRAPHITE,DIAMOND_A4"],
                                     ["--exclude", "GRAPHITE", "--exclude", "DIAMOND_A4"]])
def test_exclude_spellings_agree(exclude, capsys):
    assert main([*BASE, "--temperatures", "900", *exclude, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["partner_phases"] == [["CEMENTITE_D011"]]


def test_temperature_spec_may_start_with_a_minus_sign(capsys):
    rc = main([*BASE, "--temperatures", "-10:100:10", "--celsius", "--exclude", "GRAPHITE,DIAMOND_A4", "--json"])
    assert rc == 0
    T = json.loads(capsys.readouterr().out)["temperature_K"]
    assert T[0] == pytest.approx(263.15) and len(T) == 12


def test_missing_value_error_shows_the_equals_spelling(capsys):
    assert main([*BASE, "--temperatures", "--json"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--temperatures=-10:100:10" in err


def test_label_and_fit_range_are_checked(capsys):
    assert main([*BASE, "--temperatures", "900", "--label", "ferrite"]) == 2
    assert "PHASE=NAME" in capsys.readouterr().err
    assert main([*BASE, "--temperatures", "900:1000:50", "--fit-range", "900"]) == 2
    assert "TMIN:TMAX" in capsys.readouterr().err


def test_nothing_to_draw_exits_3_without_a_figure(tmp_path, capsys):
    fig = tmp_path / "empty.png"
    rc = main(["solvus", "fe-c", "--phase", "FCC_A1", "--solute", "C", "--temperatures", "600:700:50", "--celsius",
               "--exclude", "GRAPHITE,DIAMOND_A4", "--plot", str(fig), "--csv", str(tmp_path / "a.csv")])
    err = capsys.readouterr().err
    assert rc == 3 and not fig.exists() and (tmp_path / "a.csv").exists()
    assert [ln for ln in err.splitlines() if ln.startswith("error")] == [
        "error: no point of the line has a number (status host_unstable); no figure written"]


def test_label_reaches_the_figure(tmp_path):
    from solubility.results.plotting import display

    assert display("BCC_A2+CEMENTITE_D011", {"BCC_A2": "ferrite"}) == "ferrite + CEMENTITE_D011"
    fig = tmp_path / "f.png"
    assert main([*BASE, "--temperatures", "900:1000:50", "--exclude", "GRAPHITE,DIAMOND_A4", "--label",
                 "bcc_a2=ferrite", "--plot", str(fig)]) == 0
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs the Linux full device")
@pytest.mark.parametrize("extra", [[], ["--json"]])
def test_full_standard_output_is_one_line_and_status_4(extra):
    with open("/dev/full", "w") as full:
        proc = subprocess.run([sys.executable, "-m", "solubility.cli.main", *BASE, "--temperatures", "900",
                               "--exclude", "GRAPHITE,DIAMOND_A4", *extra], stdout=full, stderr=subprocess.PIPE,
                              text=True, timeout=600, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 4
    assert proc.stderr == "error: cannot write to standard output: No space left on device\n"


def test_ascii_console_gets_ascii():
    proc = _run(["sites", "bcc", "--lattice-parameter", "2.87"], PYTHONIOENCODING="ascii")
    assert proc.returncode == 0, proc.stderr
    assert "R = 1.2427 A" in proc.stdout and "Traceback" not in proc.stderr


def test_unwritable_home_and_folder_do_not_break_the_figure(tmp_path):
    # HOME is a regular file: no config folder can be made under it, even by root (who ignores the modes)
    home = tmp_path / "home"
    home.write_text("not a folder\n")
    work = tmp_path / "work"
    work.mkdir()
    out = tmp_path / "out"
    out.mkdir()
    home.chmod(0o500)
    work.chmod(0o500)
    try:
        env = {k: v for k, v in os.environ.items() if k not in ("MPLCONFIGDIR", "XDG_CONFIG_HOME",
                                                                 "XDG_CACHE_HOME")}
        proc = subprocess.run([sys.executable, "-m", "solubility.cli.main", *BASE, "--temperatures", "900:950:50",
                               "--exclude", "GRAPHITE,DIAMOND_A4", "--plot", str(out / "f.png")],
                              capture_output=True, text=True, timeout=600, cwd=work,
                              env={**env, "HOME": str(home), "PYTHONPATH": str(ROOT)})
    finally:
        home.chmod(0o700)
        work.chmod(0o700)
    assert proc.returncode == 0, proc.stderr
    assert (out / "f.png").exists() and "Traceback" not in proc.stderr and "Matplotlib" not in proc.stderr


def test_misfit_outside_linear_elasticity_is_flagged(capsys):
    argv = ["sites", "bcc", "--lattice-parameter", "2.87", "--solute-radius", "0.77", "--shear-modulus", "8.2e10"]
    assert main([*argv, "--json"]) == 0
    captured = capsys.readouterr()
    sites = json.loads(captured.out)["sites"]
    # eps = (0.77 - r) / r is about +3 in the BCC octahedral hole: far beyond 0.1
    assert all(s["misfit"]["within_linear_range"] is False and s["misfit"]["linear_misfit_limit"] == 0.1
               for s in sites)
    assert captured.err.startswith("warning: misfit |eps|") and captured.err.count("\n") == 1
    assert main(argv) == 0
    assert "outside linear elasticity" in capsys.readouterr().out


def test_small_misfit_is_not_flagged(capsys):
    from solubility.geometry.sites import misfit

    assert misfit(0.50, 0.52, shear_modulus=8e10).within_linear_range  # eps = 0.04 (invented sizes)
    assert not misfit(0.50, 0.60, shear_modulus=8e10).within_linear_range  # eps = 0.2
