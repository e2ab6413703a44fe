"""`solubility sweep` under hostile conditions (issue 13): each refused at once, or stopped cleanly, in one line.

Every check runs the installed command in a real subprocess with a timeout (a hang is a failure, not a slow
pass) and asserts the exit status, a single line on standard error without a traceback, and the files present
afterwards. The cases: job files that expand to 1e8 and 1e10 cases; damaged stores (a case file with a variable
removed, a number or the temperatures changed, another case's file in its place, deeply nested JSON in a case
file or the manifest);
the store lock (a live owner refuses a second job, a stale one is taken over); dask scheduler addresses that are
garbage, empty or http://, and a scheduler that accepts the connection and never answers; SIGTERM to the parent
while workers run; outputs that are inputs. All on the bundled Fe-C database (Hallstedt et al., Calphad 34
(2010) 129); the numbers themselves are checked in test_sweep.py.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
import xarray as xr

from solubility.sweeps import read_job, sweep

JOB = """
[defaults]
database = "fe-c"
solute = "C"
phase = "BCC_A2"

[[case]]
name = "ferrite"
temperatures = "850:900:50"

[[case]]
name = "ferrite-cementite"
temperatures = [900]
exclude = ["GRAPHITE", "DIAMOND_A4"]
"""
#: the harness bound of a command that must be refused before any work (imports and one database read)
QUICK = 120


def _command() -> list[str]:
    script = Path(sys.executable).with_name("solubility")
    return [str(script)] if script.exists() else [sys.executable, "-m", "solubility.cli.main"]


def _run(args: list, timeout: float = QUICK) -> subprocess.CompletedProcess:
    return subprocess.run([*_command(), *map(str, args)], capture_output=True, text=True, timeout=timeout)


def _one_line(run: subprocess.CompletedProcess, status: int, *texts: str) -> None:
    assert run.returncode == status, run.stderr
    assert run.stderr.count("\n") == 1 and run.stderr.startswith("error: "), run.stderr
    assert "Traceback" not in run.stderr
    for text in texts:
        assert text in run.stderr, run.stderr


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


@pytest.fixture(scope="module")
def job(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("job") / "job.toml"
    path.write_text(JOB, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def finished_store(job, tmp_path_factory) -> Path:
    store = tmp_path_factory.mktemp("finished") / "store"
    sweep(read_job(job), workers=0, store=store)
    return store


@pytest.mark.parametrize("lengths", [(100,) * 4, (100,) * 5], ids=["1e8 cases", "1e10 cases"])
def test_a_huge_product_is_refused_at_once(tmp_path, lengths):
    keys = ["pressure", "temperatures", "exclude", "phase", "database"]
    vary = "\n".join(f"{k} = [{', '.join(str(i + 1) for i in range(n))}]" for k, n in zip(keys, lengths, strict=False))
    path = tmp_path / "huge.toml"
    path.write_text(f'[[product]]\nname = "c{{index}}"\nsolute = "C"\n[product.vary]\n{vary}\n')
    run = _run(["sweep", path, "--store", tmp_path / "store"])
    _one_line(run, 2, f"expands to {100 ** len(lengths):,} cases; at most 10,000")
    assert not (tmp_path / "store").exists()


def _edit_case(store: Path, change) -> None:
    path = store / "case-00000.nc"
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        ds = change(ds.load())
    path.write_bytes(bytes(ds.to_netcdf(engine="h5netcdf")))


NESTED = "[" * 100_000 + "]" * 100_000  # deeper than any JSON reader recurses
DAMAGE = {
    "variable removed": (lambda s: _edit_case(s, lambda ds: ds.drop_vars("X")), "case 'ferrite'"),
    "number tampered": (lambda s: _edit_case(s, lambda ds: ds.assign(X=ds["X"] * 1.0001)), "case 'ferrite'"),
    "temperatures edited": (lambda s: _edit_case(s, lambda ds: ds.assign_coords(T=ds["T"] + 1)), "case 'ferrite'"),
    "nested JSON as a case file": (lambda s: (s / "case-00000.nc").write_text(NESTED), "case 'ferrite'"),
    "another case's file": (lambda s: shutil.copy(s / "case-00001.nc", s / "case-00000.nc"), "case 'ferrite'"),
    "nested JSON as the manifest": (lambda s: (s / "manifest.json").write_text(NESTED), "manifest.json"),
}


@pytest.mark.parametrize("damage", list(DAMAGE))
def test_a_damaged_store_is_refused_on_resume_and_left_as_it_is(job, finished_store, tmp_path, damage):
    store = tmp_path / "store"
    shutil.copytree(finished_store, store)
    change, what = DAMAGE[damage]
    change(store)
    before = _files(store)
    run = _run(["sweep", job, "--workers", "0", "--store", store, "--resume"])
    _one_line(run, 2, f"this store is damaged: {what}", "rerun without --resume or remove it")
    assert _files(store) == before  # nothing removed, nothing added (no lock left behind)


def test_a_live_lock_refuses_a_second_job_and_a_stale_one_is_taken_over(job, finished_store, tmp_path):
    store = tmp_path / "store"
    shutil.copytree(finished_store, store)
    (store / "lock").write_text(f"{os.getpid()} {socket.gethostname()}\n")  # this test process: alive
    before = _files(store)
    run = _run(["sweep", job, "--workers", "0", "--store", store, "--overwrite"])
    _one_line(run, 2, f"is in use by process {os.getpid()}")
    assert _files(store) == before
    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait()  # a process that has exited and been reaped: its lock is stale
    (store / "lock").write_text(f"{gone.pid} {socket.gethostname()}\n")
    run = _run(["sweep", job, "--workers", "0", "--store", store, "--resume", "--quiet"])
    assert run.returncode == 0 and run.stderr == "", run.stderr
    assert not (store / "lock").exists()


@pytest.mark.parametrize("address", ["not an address", "", "http://127.0.0.1:8786", "tcp://host:99999"])
def test_bad_scheduler_addresses_are_refused_at_once(job, tmp_path, address):
    run = _run(["sweep", job, "--scheduler", address, "--store", tmp_path / "store"])
    _one_line(run, 2, "tcp://HOST:PORT")
    assert not (tmp_path / "store").exists()


def test_a_scheduler_that_never_answers_cannot_hang_the_command(job, tmp_path):
    server = socket.create_server(("127.0.0.1", 0))
    held = []

    def accept():
        with contextlib.suppress(OSError):
            while True:
                held.append(server.accept()[0])  # accept and stay silent

    threading.Thread(target=accept, daemon=True).start()
    try:
        port = server.getsockname()[1]
        run = _run(["sweep", job, "--scheduler", f"tcp://127.0.0.1:{port}", "--connect-timeout", "2"])
    finally:
        server.close()
        for conn in held:
            conn.close()
    _one_line(run, 2, f"cannot reach the dask scheduler at tcp://127.0.0.1:{port} within 2 s")
    assert held  # the connection was accepted: the timeout, not a refusal, ended the command


def _descendants(pid: int) -> set[int]:
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        with contextlib.suppress(OSError, IndexError, ValueError):
            fields = Path(f"/proc/{entry}/stat").read_text().rsplit(")", 1)[1].split()
            children.setdefault(int(fields[1]), []).append(int(entry))
    out, todo = set(), [pid]
    while todo:
        kids = children.get(todo.pop(), [])
        out.update(kids)
        todo.extend(kids)
    return out


def _running(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads the process tree from /proc")
def test_sigterm_stops_the_workers_and_a_second_job_is_refused_meanwhile(tmp_path):
    job = tmp_path / "long.toml"
    job.write_text('[[product]]\nname = "p{pressure}"\ndatabase = "fe-c"\nsolute = "C"\nphase = "BCC_A2"\n'
                   'temperatures = "700:980:0.5"\n[product.vary]\n'
                   'pressure = [1e5, 2e5, 3e5, 4e5, 5e5, 6e5, 7e5, 8e5, 9e5, 1e6, 2e6, 3e6]\n')
    # long enough (12 cases of 561 temperatures, minutes of work) that the sweep is still running when the
    # second job and the signal come, however fast the machine
    store = tmp_path / "store"
    proc = subprocess.Popen([*_command(), "sweep", str(job), "--workers", "2", "--store", str(store), "--quiet"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        deadline = time.monotonic() + 240
        while not (store / "lock").exists() or len(_descendants(proc.pid)) < 3:  # fork server and 2 workers
            assert proc.poll() is None, proc.stderr.read()
            assert time.monotonic() < deadline, "the sweep did not start its workers in 240 s"
            time.sleep(0.1)
        second = _run(["sweep", job, "--workers", "0", "--store", store, "--overwrite"])
        _one_line(second, 2, f"is in use by process {proc.pid}")
        assert proc.poll() is None, "the first sweep ended before the check"
        workers = _descendants(proc.pid)
        os.kill(proc.pid, signal.SIGTERM)  # the parent only, as a service manager or `kill PID` does
        _, err = proc.communicate(timeout=60)
    finally:
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)
    assert proc.returncode == 143, err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert err.startswith("error: sweep stopped by SIGTERM: workers stopped, temporary files removed")
    deadline = time.monotonic() + 30
    while any(_running(p) for p in workers) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert not [p for p in workers if _running(p)]
    assert (store / "manifest.json").is_file() and not (store / "lock").exists()
    assert not list(store.glob(".*.part"))


def test_outputs_that_are_inputs_or_each_other_are_refused_before_work(job, tmp_path, cfe_tdb_path):
    copy = tmp_path / "job.toml"
    copy.write_text(job.read_text())
    run = _run(["sweep", copy, "--csv", copy, "--overwrite"])
    _one_line(run, 2, "--csv", "is the job file")
    assert copy.read_text() == job.read_text()
    run = _run(["sweep", copy, "--csv", tmp_path / "out.dat", "--netcdf", f"{tmp_path}/./out.dat"])
    _one_line(run, 2, "is the same file as --netcdf")
    tdb = tmp_path / "fec.tdb"
    tdb.write_bytes(cfe_tdb_path.read_bytes())
    own = tmp_path / "own.toml"
    own.write_text(JOB.replace('database = "fe-c"', 'database = "fec.tdb"'))
    run = _run(["sweep", own, "--netcdf", tdb, "--overwrite"])
    _one_line(run, 2, "is the database of case 'ferrite'")
    assert tdb.read_bytes() == cfe_tdb_path.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fec.tdb", "job.toml", "own.toml"]
