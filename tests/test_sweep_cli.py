"""`solubility sweep JOB.toml`: the command line, a real SIGKILL part-way and a resume, a full disk.

The kill check runs the installed command in a real subprocess, kills it with SIGKILL as soon as its first
case file appears in the store, resumes it with the same command and ``--resume``, and compares the result
with an uninterrupted run: the same JSON text and identical NetCDF files (the creation time aside). A full disk is
made real with the operating system's file-size limit (RLIMIT_FSIZE: a write past it fails with EFBIG, "File
too large"; Python ignores the SIGXFSZ signal that comes with it). All on the bundled Fe-C database.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import xarray as xr

from solubility.cli.main import main

try:  # --netcdf writes NetCDF-4 through h5netcdf, which needs h5py (the checks without it still run)
    import h5py  # noqa: F401

    HAVE_H5PY = True
except ImportError:
    HAVE_H5PY = False

JOB = """
[defaults]
database = "fe-c"
solute = "C"

[[case]]
name = "ferrite"
phase = "BCC_A2"
temperatures = "850:950:50"

[[case]]
name = "no-partner"  # every partner excluded: this case fails, the others go on
phase = "BCC_A2"
temperatures = [1000]
exclude = ["CEMENTITE_D011", "DIAMOND_A4", "FCC_A1", "GRAPHITE", "HCP_A3", "LIQUID", "M7C3_D101"]

[[product]]
name = "{phase}-p{pressure}"
exclude = ["GRAPHITE", "DIAMOND_A4"]
temperatures = "900:980:8"
[product.vary]
phase = ["BCC_A2"]
pressure = [1e5, 2e8, 4e8, 6e8, 8e8, 1e9]
"""
N_CASES = 8


def _command() -> list[str]:
    script = Path(sys.executable).with_name("solubility")
    return [str(script)] if script.exists() else [sys.executable, "-m", "solubility.cli.main"]


def _nc(path: Path) -> xr.Dataset:
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        ds = ds.load()
    ds.attrs.pop("created")
    return ds


@pytest.fixture(scope="module")
def job(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("job") / "job.toml"
    path.write_text(JOB, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def reference(job, tmp_path_factory):
    """An uninterrupted run, in this process: (exit status, JSON text, NetCDF path, CSV path)."""
    out = tmp_path_factory.mktemp("reference")
    argv = ["sweep", str(job), "--workers", "0", "--json", "--quiet", "--csv", str(out / "s.csv")]
    argv += ["--netcdf", str(out / "s.nc")] if HAVE_H5PY else []
    stdout = io.StringIO()
    with contextlib.redirect_stdout(stdout):
        status = main(argv)
    return status, stdout.getvalue(), out / "s.nc", out / "s.csv"


def test_json_netcdf_and_csv_outputs(reference):
    status, text, nc, csv = reference
    assert status == 1  # one case failed; its results are NaN with the message
    data = json.loads(text)  # exactly one JSON object on stdout
    assert list(data) == ["cases"] and len(data["cases"]) == N_CASES
    failed = [c for c in data["cases"] if c["status"] == "failed"]
    assert [c["name"] for c in failed] == ["no-partner"] and failed[0]["error"].startswith("InputError")
    ferrite = data["cases"][0]
    assert ferrite["temperature_K"] == [850.0, 900.0, 950.0] and ferrite["partner_phases"][0] == ["GRAPHITE"]
    assert [c["name"] for c in data["cases"][2:4]] == ["BCC_A2-p1e5", "BCC_A2-p2e8"]
    if HAVE_H5PY:
        assert _nc(nc).sizes["case"] == N_CASES
    rows = csv.read_text().splitlines()
    assert rows[0].startswith("case,database,phase,solute,pressure,fix,exclude,balance,case_status,case_error,")
    assert len(rows) == 1 + 3 + 1 + 6 * 11  # one row per case and requested temperature


def test_summary_on_stderr_and_a_table_on_stdout(job, reference, capsys):
    assert main(["sweep", str(job), "--workers", "0"]) == 1
    out, err = capsys.readouterr()
    assert out.splitlines()[0].split() == ["case", "status", "points", "converged", "partners", "error"]
    assert "no-partner" in out
    # not a terminal: no progress bar, only the summary
    assert err.strip().splitlines() == [err.strip()]
    assert err.startswith(f"sweep: {N_CASES} cases, {N_CASES - 1} ok, 1 failed, ")


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ('[[case]]\nname = "a"\ndatabase = "fe-c"\nphase = "BCC_A2"\nsolute = "C"\ntemperature = [900]\n',
         "case 1 ('a'): key 'temperature' is unknown; did you mean 'temperatures'?"),
        ('[[case]]\nname = "a"\ndatabase = "fe-c"\nphase = "BCC_A2"\nsolute = "C"\ntemperatures = [900]\n'
         'exclude = "GRAPHITE"\n', "case 1 ('a'): key 'exclude': expected a list of phase names"),
        ('[[case]]\nname = "a"\nphase = BCC_A2\n', "invalid TOML"),
        ('[[case]]\nname = "a"\ndatabase = "fe-c"\nphase = "BCC_A3"\nsolute = "C"\ntemperatures = [900]\n',
         "case 'a': key 'phase': phase 'BCC_A3' is not in database 'fe-c'; did you mean BCC_A2"),
    ],
    ids=["unknown key", "wrong type", "invalid TOML", "unknown phase"],
)
def test_bad_job_files_fail_before_any_work(tmp_path, capsys, text, message):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    store = tmp_path / "store"
    assert main(["sweep", str(path), "--store", str(store), "--json"]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("error: ") and message in err
    assert not store.exists()  # nothing started


def test_options_are_checked_before_any_work(job, tmp_path, capsys):
    existing = tmp_path / "out.nc"
    existing.write_text("keep me")
    assert main(["sweep", str(job), "--netcdf", str(existing)]) == 2
    assert "exists already" in capsys.readouterr().err and existing.read_text() == "keep me"
    assert main(["sweep", str(job), "--resume"]) == 2
    assert "--resume needs --store" in capsys.readouterr().err
    assert main(["sweep", str(job), "--workers", "2", "--scheduler", "tcp://127.0.0.1:1"]) == 2
    assert "not allowed with argument" in capsys.readouterr().err


def _run(args: list[str], **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([*_command(), *args], capture_output=True, text=True, timeout=300, **kwargs)


def test_sigkill_part_way_then_resume_gives_the_uninterrupted_result(job, reference, tmp_path):
    store = tmp_path / "store"
    argv = [*_command(), "sweep", str(job), "--workers", "1", "--store", str(store), "--quiet"]
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True)
    try:
        deadline = time.monotonic() + 240
        while not list(store.glob("case-*.nc")):
            assert proc.poll() is None, proc.stderr.read().decode()
            assert time.monotonic() < deadline, "no case finished in 240 s"
            time.sleep(0.01)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        with contextlib.suppress(ProcessLookupError):  # its workers: the process group of the session leader
            os.killpg(proc.pid, signal.SIGKILL)
        proc.stderr.close()
    assert proc.returncode == -signal.SIGKILL
    finished = sorted(p.name for p in store.glob("case-*.nc"))
    assert 1 <= len(finished) < N_CASES, "the kill came too late to test anything"
    # finished cases (those with a case file) are kept on resume; a failed one (no-partner) is never stored
    before = {name: (store / name).stat().st_mtime_ns for name in finished}
    out = tmp_path / "out"
    out.mkdir()
    netcdf = ["--netcdf", str(out / "s.nc")] if HAVE_H5PY else []
    resumed = _run(["sweep", str(job), "--workers", "1", "--store", str(store), "--resume", "--json",
                    "--csv", str(out / "s.csv"), *netcdf])
    status, text, nc, csv = reference
    assert resumed.returncode == status, resumed.stderr
    assert resumed.stdout == text  # the same JSON, character for character
    if HAVE_H5PY:
        xr.testing.assert_identical(_nc(out / "s.nc"), _nc(nc))
    assert (out / "s.csv").read_text() == csv.read_text()
    # the cases finished before the kill were read back, not run again
    assert all((store / name).stat().st_mtime_ns == t for name, t in before.items())
    assert f"({len(before)} from the store)" in resumed.stderr
    assert len(list(store.glob("case-*.nc"))) == N_CASES - 1 and not list(store.glob(".*.part"))
    assert not (store / "lock").exists()


_LIMITED = (
    "import os, resource, sys; "
    "hard = resource.getrlimit(resource.RLIMIT_FSIZE)[1]; "
    "resource.setrlimit(resource.RLIMIT_FSIZE, (int(sys.argv[1]), hard)); "
    "os.execv(sys.argv[2], sys.argv[2:])"
)


@pytest.mark.skipif(not hasattr(os, "execv") or sys.platform == "win32", reason="POSIX file-size limit")
def test_a_full_disk_is_one_line_and_leaves_a_resumable_store(job, reference, tmp_path):
    store = tmp_path / "store"
    command = _command()
    if len(command) > 1:
        pytest.skip("needs the installed 'solubility' script")
    # 3000 bytes: room for the manifest (about 1 kB for 8 cases), not for a case file (about 25 kB of NetCDF)
    full = subprocess.run([sys.executable, "-c", _LIMITED, "3000", command[0], "sweep", str(job),
                           "--workers", "0", "--store", str(store), "--quiet"],
                          capture_output=True, text=True, timeout=300)
    assert full.returncode == 4  # an output could not be written (README: exit statuses)
    assert full.stderr.count("\n") == 1 and "File too large" in full.stderr
    assert "rerun with resume" in full.stderr
    assert (store / "manifest.json").is_file()
    assert not list(store.glob("case-*")) and not list(store.glob(".*"))  # no case file, whole or partial
    assert not (store / "lock").exists()
    resumed = _run(["sweep", str(job), "--workers", "0", "--store", str(store), "--resume", "--json"])
    assert resumed.returncode == reference[0] and resumed.stdout == reference[1]


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX terminal")
def test_progress_bar_only_on_a_terminal(tmp_path):
    import fcntl
    import pty
    import struct
    import termios

    job = tmp_path / "one.toml"
    job.write_text('[[case]]\nname = "g"\ndatabase = "fe-c"\nphase = "BCC_A2"\nsolute = "C"\ntemperatures = [1000]\n'
                   'exclude = ["CEMENTITE_D011", "DIAMOND_A4", "FCC_A1", "GRAPHITE", "HCP_A3", "LIQUID",'
                   ' "M7C3_D101"]\n')
    main_fd, child_fd = pty.openpty()
    fcntl.ioctl(child_fd, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 100, 0, 0))  # a 100-column terminal
    try:
        run = subprocess.run([*_command(), "sweep", str(job), "--workers", "0"], stdout=subprocess.DEVNULL,
                             stderr=child_fd, timeout=300)
        os.close(child_fd)
        chunks = []
        while True:
            try:
                chunk = os.read(main_fd, 65536)
            except OSError:  # EIO once the terminal's other end is closed and drained
                break
            if not chunk:
                break
            chunks.append(chunk)
    finally:
        os.close(main_fd)
    text = b"".join(chunks).decode()
    assert run.returncode == 1  # the one case fails
    assert "1/1 [" in text and "g: failed" in text  # tqdm's bar, with the case just finished
    assert "sweep: 1 cases, 0 ok, 1 failed" in text
    quiet = _run(["sweep", str(job), "--workers", "0", "--quiet"])
    assert quiet.returncode == 1 and quiet.stderr == ""
