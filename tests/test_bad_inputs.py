"""The bad-input corpus (tests/bad_inputs/cases.toml): every bad input is refused cleanly.

Command line (the contract in /work/shared/design.md and the README's "Errors and limits"): exit status 2,
nothing on standard output, exactly one line on standard error that starts with "error:" and names the bad
value, no traceback, and no file created or changed. Python API: the tool's own exception (a
`solubility.errors.SolubilityError`), which is also the matching builtin (ValueError, FileNotFoundError, ...),
with a one-line message naming the bad value; never a bare third-party exception.

Most command-line cases run in process through `solubility.cli.main` (the bundled database is then read once);
a handful run through the installed console script to show that nothing but the one line reaches standard
error of a real process. Every case runs under a time bound enforced here (`CASE_TIME_BOUND`: a refusal comes at
once, so a case still running then is a hang, and a hang is a failure, not a slow pass): an interval timer fails
the case from Python code, and faulthandler ends the run with the stacks if a hang sits in compiled code.

A case may carry ``known_failure = "why; owner"``: it is expected to fail (strict xfail) until the module that
owns the behaviour is fixed, and then fails as XPASS so that the mark is removed.
"""

from __future__ import annotations

import builtins
import faulthandler
import importlib
import signal
import subprocess
import sys
import tomllib
from pathlib import Path
from typing import Any

import pytest

from solubility import errors
from solubility.cli.main import COMMANDS, main

DATA = Path(__file__).parent / "bad_inputs"
MANIFEST = tomllib.loads((DATA / "cases.toml").read_text(encoding="utf-8"))
CLI_CASES = MANIFEST["cli"]
API_CASES = MANIFEST["api"]
#: seconds one case may take (loose for a shared 2-core machine: the slowest refusal loads a database, ~10 s)
CASE_TIME_BOUND = 120
#: the existing regular file every case finds in its working folder, and its content
EXISTING = "exists.csv"
SENTINEL = b"# an existing file that no bad input may change\n"
#: cases also run through the installed console script (one per command, plus a usage error)
SUBPROCESS_IDS = (
    "sites-structure-overlapping-atoms",
    "model-output-inside-regular-file",
    "audit-database-binary",
    "solvus-host-cementite",
    "solvus-temperatures-reversed",
    "sweep-job-misspelt-key",
    "unknown-command",
)
#: the public functions of the brief; each must be exercised by the corpus
API_FUNCTIONS = (
    "solubility.solvus",
    "solubility.builtin_structure",
    "solubility.read_structure",
    "solubility.find_sites",
    "solubility.misfit",
    "solubility.SublatticeModel",
    "solubility.load_database",
    "solubility.audit_database",
    "solubility.sweep",
    "solubility.read_job",
)


def _subst(value: Any, tmp: Path) -> Any:
    """Replace {data} and {tmp} in every string of `value` (lists and tables recursively)."""
    if isinstance(value, str):
        return value.replace("{data}", str(DATA)).replace("{tmp}", str(tmp))
    if isinstance(value, list):
        return [_subst(v, tmp) for v in value]
    if isinstance(value, dict):
        return {k: _subst(v, tmp) for k, v in value.items()}
    return value


def _snapshot(folder: Path) -> dict[str, bytes | None]:
    """Every file and folder under `folder` with its content (None for a folder)."""
    return {
        str(p.relative_to(folder)): (None if p.is_dir() else p.read_bytes()) for p in sorted(folder.rglob("*"))
    }


def _params(cases: list[dict]) -> list:
    out = []
    for case in cases:
        marks = []
        if "known_failure" in case:
            marks.append(pytest.mark.xfail(strict=True, reason=case["known_failure"]))
        out.append(pytest.param(case, id=case["id"], marks=marks))
    return out


@pytest.fixture
def time_bound():
    """Fail the case once it has run `CASE_TIME_BOUND` seconds; end the run if even that cannot stop it."""

    def hang(signum, frame):
        pytest.fail(f"the case ran past the time bound of {CASE_TIME_BOUND} s: a hang")

    previous = signal.signal(signal.SIGALRM, hang)
    signal.setitimer(signal.ITIMER_REAL, CASE_TIME_BOUND)
    faulthandler.dump_traceback_later(2 * CASE_TIME_BOUND, exit=True, file=sys.__stderr__)  # stuck in C code
    try:
        yield
    finally:
        faulthandler.cancel_dump_traceback_later()
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


@pytest.fixture
def workdir(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A fresh working folder holding one existing regular file."""
    (tmp_path / EXISTING).write_bytes(SENTINEL)
    monkeypatch.chdir(tmp_path)
    return tmp_path


def _check_one_line(err: str, expect: str) -> None:
    lines = err.splitlines()
    assert len(lines) == 1, f"expected one line on standard error, got {len(lines)}: {err!r}"
    assert lines[0].startswith("error: "), lines[0]
    assert expect in lines[0], f"{expect!r} not in {lines[0]!r}"
    assert "Traceback" not in err


# ---------------------------------------------------------------------------------------------- the corpus
def test_corpus_is_complete() -> None:
    """At least 40 cases with unique ids, every listed file present, every corpus file used (issue 6)."""
    ids = [c["id"] for c in CLI_CASES + API_CASES]
    assert len(ids) >= 40
    assert len(set(ids)) == len(ids), "case ids repeat"
    used = {f for c in CLI_CASES + API_CASES for f in c.get("files", [])}
    for f in used:
        assert (DATA / f).is_file(), f
    present = {str(p.relative_to(DATA)) for p in DATA.rglob("*") if p.is_file() and p.parent != DATA}
    assert present == used, f"corpus files not used by any case: {sorted(present - used)}"
    assert {c["argv"][0] for c in CLI_CASES} >= set(COMMANDS), "a command has no bad input"
    assert {c["call"].removesuffix(".from_structure") for c in API_CASES} >= set(API_FUNCTIONS)


@pytest.mark.parametrize("case", _params(CLI_CASES))
def test_cli_bad_input(case: dict, workdir: Path, capsys: pytest.CaptureFixture[str], time_bound) -> None:
    """Exit status 2, empty stdout, one line on stderr naming the value, no file created or changed."""
    argv = _subst(case["argv"], workdir)
    before_tmp, before_data = _snapshot(workdir), _snapshot(DATA)
    status = main(argv)
    out, err = capsys.readouterr()
    assert status == 2, f"exit status {status}; stderr {err!r}"
    assert out == ""
    _check_one_line(err, case["expect"])
    assert _snapshot(workdir) == before_tmp, "a file was created or changed"
    assert _snapshot(DATA) == before_data, "a corpus file was created or changed"


def _resolve_call(dotted: str) -> Any:
    module, *attrs = dotted.split(".")
    obj = importlib.import_module(module)
    for attr in attrs:
        obj = getattr(obj, attr)
    return obj


def _resolve_arg(value: Any) -> Any:
    """'@site LATTICE A KIND' -> that site family (A '-' for no absolute scale); '@none' -> None."""
    if value == "@none":
        return None
    if isinstance(value, str) and value.startswith("@site "):
        from solubility import builtin_structure, find_sites

        _, lattice, a, kind = value.split()
        structure = builtin_structure(lattice, lattice_parameter=None if a == "-" else float(a))
        (family,) = [f for f in find_sites(structure) if f.kind == kind]
        return family
    return value


@pytest.mark.parametrize("case", _params(API_CASES))
def test_api_bad_input(case: dict, workdir: Path, time_bound) -> None:
    """The tool's own exception, also the matching builtin, with a one-line message naming the value."""
    func = _resolve_call(case["call"])
    args = [_resolve_arg(a) for a in _subst(case.get("args", []), workdir)]
    kwargs = {k: _resolve_arg(v) for k, v in _subst(case.get("kwargs", {}), workdir).items()}
    expected = getattr(errors, case["raises"])
    before = _snapshot(workdir)
    with pytest.raises(errors.SolubilityError) as info:
        func(*args, **kwargs)
    exc = info.value
    assert isinstance(exc, expected), f"{type(exc).__name__}: {exc}"
    assert isinstance(exc, getattr(builtins, case["builtin"]))
    assert type(exc).__module__ == "solubility.errors"
    message = str(exc)
    assert len(message.splitlines()) == 1, message
    assert case["expect"] in message, f"{case['expect']!r} not in {message!r}"
    assert _snapshot(workdir) == before


# ---------------------------------------------------------------------------------------------- real processes
def _console_script() -> Path:
    script = Path(sys.executable).with_name("solubility")
    if not script.is_file():
        pytest.fail(f"the console script {script} is not installed (pip install the project)")
    return script


@pytest.mark.slow
@pytest.mark.parametrize("case", [c for c in CLI_CASES if c["id"] in SUBPROCESS_IDS], ids=lambda c: c["id"])
def test_cli_bad_input_subprocess(case: dict, workdir: Path) -> None:
    """Through the installed command: status 2, one line on stderr, nothing on stdout, no traceback."""
    argv = _subst(case["argv"], workdir)
    before = _snapshot(workdir)
    proc = subprocess.run(
        [str(_console_script()), *argv], capture_output=True, text=True, cwd=workdir, timeout=120, check=False
    )
    assert proc.returncode == 2, proc.stderr
    assert proc.stdout == ""
    _check_one_line(proc.stderr, case["expect"])
    assert _snapshot(workdir) == before


def test_subprocess_ids_exist() -> None:
    """Every case named for a real process is in the corpus (a renamed case would silently drop out)."""
    assert set(SUBPROCESS_IDS) <= {c["id"] for c in CLI_CASES}


@pytest.mark.slow
def test_traceback_flag_shows_traceback(workdir: Path) -> None:
    """--traceback is the way to see the full traceback: the one-line rule holds only without it."""
    proc = subprocess.run(
        [str(_console_script()), "--traceback", "sites", str(DATA / "structures" / "flat_lattice.toml")],
        capture_output=True, text=True, cwd=workdir, timeout=120, check=False,
    )  # fmt: skip
    assert proc.returncode != 0
    assert "Traceback" in proc.stderr
    assert "StructureError" in proc.stderr
