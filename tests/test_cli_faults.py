"""Faults and interruptions on the command line (issue 13): a full disk, Ctrl-C and SIGTERM, warnings.

* A disk that fills while an output is written is made real with the operating system's file-size limit
  (RLIMIT_FSIZE, set in the child before it starts: a write past it fails with EFBIG, "File too large"; Python
  ignores the SIGXFSZ signal that comes with it). Every output kind gives one line, exit status 4 (README: an
  output could not be written), the old file kept and no temporary file left.
* Ctrl-C (SIGINT) and SIGTERM during a solvus line with two outputs, and between its two outputs, leave no
  output and no temporary file, and say so in one line (exit status 130 / 143, the shell's 128 + signal).
* Warnings (the tool's, pycalphad's, numpy's) are one line each, ``warning: ...``, without a source line.

Every command runs in a real process under a time bound enforced here (a hang is a failure, not a slow pass).
All on the bundled Fe-C database (Hallstedt et al., Calphad 34 (2010) 129); the numbers are not checked here.
"""

from __future__ import annotations

import errno
import os
import signal
import subprocess
import sys
import textwrap
import warnings
from pathlib import Path

import pytest

from solubility.cli import main as cli
from solubility.errors import DatabaseWarning

ROOT = Path(__file__).resolve().parents[1]
#: seconds any one command may take (a line of a few points; loose for a shared 2-core machine)
TIME_BOUND = 120
OLD = b"the previous result\n"
SOLVUS = ["solvus", "fe-c", "--phase", "BCC_A2", "--solute", "C", "--temperatures", "700:900:50",
          "--exclude", "GRAPHITE,DIAMOND_A4"]  # fmt: skip
UPTAKE = ["uptake", "fe-c", "--phase", "FCC_A1", "--solute", "C", "--temperatures", "1100:1300:50",
          "--activity", "0.5"]  # fmt: skip
MODEL = ["model", "fcc", "--phase", "FCC_X", "--host", "FE", "--solute", "C", "--site", "octahedral"]


def _env() -> dict[str, str]:
    return {**os.environ, "PYTHONPATH": str(ROOT)}


def _limit(size: int):
    def preexec() -> None:
        import resource

        resource.setrlimit(resource.RLIMIT_FSIZE, (size, resource.getrlimit(resource.RLIMIT_FSIZE)[1]))

    return preexec


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".part"))


# ---------------------------------------------------------------------------------------------- a full disk
@pytest.mark.slow
@pytest.mark.skipif(sys.platform == "win32", reason="POSIX file-size limit")
@pytest.mark.parametrize(
    "argv, outputs",
    [
        (SOLVUS, [("--csv", "old.csv")]),
        (SOLVUS, [("--netcdf", "old.nc")]),
        (SOLVUS, [("--plot", "old.png")]),
        (SOLVUS, [("--csv", "old.csv"), ("--netcdf", "old.nc")]),
        (UPTAKE, [("--netcdf", "old.nc")]),
        (UPTAKE, [("--csv", "old.csv"), ("--plot", "old.png")]),
        (MODEL, [("--output", "old.tdb")]),
    ],
    ids=["solvus-csv", "solvus-netcdf", "solvus-plot", "solvus-csv-netcdf", "uptake-netcdf", "uptake-csv-plot",
         "model-output"],
)
def test_disk_fills_while_writing(argv: list[str], outputs: list[tuple[str, str]], tmp_path: Path) -> None:
    """EFBIG part-way through an output: one line, exit 4, every old file kept, no temporary file."""
    extra = []
    for option, name in outputs:
        (tmp_path / name).write_bytes(OLD)
        extra += [option, name]
    proc = subprocess.run([sys.executable, "-m", "solubility.cli.main", *argv, *extra, "--overwrite"],
                          cwd=tmp_path, env=_env(), capture_output=True, text=True, timeout=TIME_BOUND,
                          preexec_fn=_limit(100), check=False)  # fmt: skip
    assert proc.returncode == 4, proc.stderr
    lines = proc.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: could not write") and "File too large" in lines[0]
    assert "Traceback" not in proc.stderr
    for _, name in outputs:
        assert (tmp_path / name).read_bytes() == OLD, name
    assert _leftovers(tmp_path) == []


# ---------------------------------------------------------------------------------------------- Ctrl-C, SIGTERM
_INTERRUPT = """
import os, signal, sys
import solubility.api as api
import solubility.results.dataset as dataset
from solubility.cli.main import main

SIG, WHERE = signal.{sig}, {where!r}
# a process started in the background by a non-interactive shell (as CI may start the suite) inherits SIGINT
# ignored, and Python then installs no Ctrl-C handler; a terminal's Ctrl-C reaches a process that has one
signal.signal(signal.SIGINT, signal.default_int_handler)
if WHERE == "line":  # at the second temperature of the line
    real = api.solvus
    def solvus(*args, **kwargs):
        seen = []
        def progress(T):
            seen.append(T)
            if len(seen) == 2:
                os.kill(os.getpid(), SIG)
        kwargs["progress"] = progress
        return real(*args, **kwargs)
    api.solvus = solvus
else:  # the CSV is in its temporary file, the NetCDF is being encoded
    real = dataset.netcdf_bytes
    def netcdf_bytes(ds):
        assert [p.name for p in __import__("pathlib").Path(".").iterdir() if p.name.endswith(".part")]
        os.kill(os.getpid(), SIG)
        return real(ds)
    dataset.netcdf_bytes = netcdf_bytes
sys.exit(main({argv!r}))
"""


@pytest.mark.slow
@pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")
@pytest.mark.parametrize("where", ["line", "between-outputs"])
@pytest.mark.parametrize("sig, status, name", [("SIGINT", 130, "Ctrl-C"), ("SIGTERM", 143, "SIGTERM")])
def test_interrupted_solvus_leaves_no_output(where: str, sig: str, status: int, name: str, tmp_path: Path) -> None:
    """The signal during the line or between its two outputs: no output, no temporary, old file kept, one line."""
    (tmp_path / "line.csv").write_bytes(OLD)
    argv = [*SOLVUS, "--csv", "line.csv", "--netcdf", "line.nc", "--overwrite", "--quiet"]
    script = textwrap.dedent(_INTERRUPT).format(sig=sig, where=where, argv=argv)
    proc = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, env=_env(), capture_output=True,
                          text=True, timeout=TIME_BOUND, check=False)  # fmt: skip
    assert proc.returncode == status, proc.stderr
    assert proc.stdout == ""
    assert proc.stderr == (f"error: interrupted by {name}; no output file was written or changed and no "
                           "temporary file is left\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["line.csv"]
    assert (tmp_path / "line.csv").read_bytes() == OLD


# ---------------------------------------------------------------------------------------------- one-line messages
def _fake_command(monkeypatch: pytest.MonkeyPatch, run) -> None:
    """`solubility databases` runs `run(args)` instead."""
    import solubility.cli.commands.databases as databases

    monkeypatch.setattr(databases, "run", run)


def test_warnings_are_one_line_each(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """The tool's warning as its message; another library's with its category and package; no source line."""

    def run(args) -> int:
        warnings.warn(DatabaseWarning("functions referenced but never defined:\n  GNOSUCH"), stacklevel=1)
        warnings.warn_explicit("the model has no\nordering", UserWarning,
                               "/venv/lib/python3.11/site-packages/pycalphad/core/utils.py", 10)  # fmt: skip
        warnings.warn_explicit("overflow encountered in multiply", RuntimeWarning,
                               "/venv/lib/python3.11/site-packages/numpy/_core/fromnumeric.py", 54)  # fmt: skip
        return 0

    _fake_command(monkeypatch, run)
    shown = warnings.showwarning
    with warnings.catch_warnings():
        warnings.simplefilter("always")  # pytest turns warnings into errors; here they are to be shown
        status = cli.main(["databases"])
    out, err = capsys.readouterr()
    assert status == 0 and out == ""
    assert err.splitlines() == [
        "warning: functions referenced but never defined: GNOSUCH",
        "warning: the model has no ordering (UserWarning in pycalphad)",
        "warning: overflow encountered in multiply (RuntimeWarning in numpy)",
    ]
    assert warnings.showwarning is shown  # restored after the command


@pytest.mark.slow
def test_numpy_warning_in_a_real_process(tmp_path: Path) -> None:
    """A temperature of 1e308 K overflows inside numpy: one warning line, the points failed (exit 3)."""
    proc = subprocess.run([sys.executable, "-m", "solubility.cli.main", *SOLVUS[:6], "--temperatures", "1e308"],
                          cwd=tmp_path, env=_env(), capture_output=True, text=True, timeout=TIME_BOUND,
                          check=False)  # fmt: skip
    assert proc.returncode == 3, proc.stderr
    lines = proc.stderr.splitlines()
    assert all(ln.startswith(("warning: ", "error: ")) for ln in lines), proc.stderr
    assert any(ln.startswith("warning: ") and "RuntimeWarning in numpy" in ln for ln in lines), proc.stderr
    assert "Traceback" not in proc.stderr and "return " not in proc.stderr


@pytest.mark.parametrize("code, text", [(errno.ENOSPC, "No space left on device"), (errno.EFBIG, "File too large")])
def test_write_fault_outside_the_outputs(code: int, text: str, monkeypatch: pytest.MonkeyPatch,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    """A file written on the way (a cache, a temporary database) on a full device: one line, exit 4."""

    def run(args) -> int:
        raise OSError(code, text, "/tmp/scratch.tdb")

    _fake_command(monkeypatch, run)
    status = cli.main(["databases"])
    out, err = capsys.readouterr()
    assert status == 4 and out == ""
    assert err == f"error: could not write '/tmp/scratch.tdb': {text}; free some space and run again\n"


def test_sigterm_handler_is_restored(monkeypatch: pytest.MonkeyPatch) -> None:
    """The command line's SIGTERM handler is in place only while a command runs."""
    seen = []
    _fake_command(monkeypatch, lambda args: seen.append(signal.getsignal(signal.SIGTERM)) or 0)
    before = signal.getsignal(signal.SIGTERM)
    assert cli.main(["databases"]) == 0
    assert seen and seen[0] is cli._terminated
    assert signal.getsignal(signal.SIGTERM) is before
