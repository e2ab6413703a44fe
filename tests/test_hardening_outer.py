"""Hardening, round two (issue 13), for outputs, geometry limits and database faults.

Every command-line case runs as a real process with a time bound enforced here (``timeout=``: a hang is a
failure, not a slow pass) and asserts the exit status, one line on standard error without a traceback, and the
files present afterwards. The cases of the bad-input corpus named in CORPUS_IDS also run there in process.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import tomllib
import warnings
from pathlib import Path

import pytest

from solubility._io import atomic_outputs, check_output_path, check_outputs
from solubility.databases.reader import load_database
from solubility.errors import DatabaseError, OutputError

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).parent / "bad_inputs"
#: seconds any one command may take (the refusals come at once; the bound is loose for a shared machine)
TIME_BOUND = 60
#: the corpus cases added for this issue, also run here as real processes under the time bound
CORPUS_IDS = (
    "sites-hcp-c-over-a-1000",
    "sites-hcp-c-over-a-0.001",
    "sites-lattice-parameter-1e308",
    "sites-solute-radius-1e300",
    "sites-structure-needle-cell",
    "sites-structure-nearly-singular",
    "sites-structure-flat-angle",
    "sites-structure-huge-lattice",
    "audit-database-repeated-parameter",
    "audit-database-conflicting-parameter",
    "audit-database-phase-twice",
    "audit-database-recursive-function",
    "audit-database-mutual-recursion",
)
_CASES = {c["id"]: c for c in tomllib.loads((DATA / "cases.toml").read_text(encoding="utf-8"))["cli"]}
_BLOCK = ["model", "fcc", "--phase", "FCC_X", "--host", "FE", "--solute", "C", "--site", "octahedral"]


def _run(argv: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run(
        [sys.executable, "-m", "solubility.cli.main", *argv], cwd=cwd, env=env, capture_output=True, text=True,
        timeout=TIME_BOUND, check=False,
    )


def _refused(proc: subprocess.CompletedProcess[str], expect: str) -> None:
    """Exit status 2, nothing on stdout, one stderr line starting 'error:' holding `expect`, no traceback."""
    assert proc.returncode == 2, proc.stderr
    assert proc.stdout == ""
    lines = proc.stderr.splitlines()
    assert len(lines) == 1, proc.stderr
    assert lines[0].startswith("error: ") and expect in lines[0], lines[0]
    assert "Traceback" not in proc.stderr


def _files(folder: Path) -> dict[str, bytes | str]:
    """Every entry under `folder`: file content, or the target of a symbolic link."""
    out: dict[str, bytes | str] = {}
    for p in sorted(folder.rglob("*")):
        key = str(p.relative_to(folder))
        out[key] = f"-> {os.readlink(p)}" if p.is_symlink() else (b"" if p.is_dir() else p.read_bytes())
    return out


# ---------------------------------------------------------------------------------------------- corpus cases
@pytest.mark.parametrize("case_id", CORPUS_IDS)
def test_corpus_case_in_a_real_process(case_id: str, tmp_path: Path) -> None:
    """Geometry limits and database faults: refused at once, one line, nothing written."""
    case = _CASES[case_id]
    argv = [a.replace("{data}", str(DATA)).replace("{tmp}", str(tmp_path)) for a in case["argv"]]
    before = _files(tmp_path)
    _refused(_run(argv, tmp_path), case["expect"])
    assert _files(tmp_path) == before


# ---------------------------------------------------------------------------------------------- output paths
def test_model_output_over_its_own_database_is_refused(tmp_path: Path) -> None:
    """`model --output base.tdb --with-elements base.tdb --overwrite` would replace its input database."""
    db = tmp_path / "base.tdb"
    db.write_bytes((ROOT / "solubility" / "databases" / "cfe_broshe.tdb").read_bytes())
    before = _files(tmp_path)
    proc = _run([*_BLOCK, "--with-elements", "base.tdb", "--output", "./base.tdb", "--overwrite"], tmp_path)
    _refused(proc, "output file './base.tdb' is the input")
    assert _files(tmp_path) == before


def test_model_output_over_its_structure_file_is_refused(tmp_path: Path) -> None:
    s = tmp_path / "b2.toml"
    s.write_bytes((DATA / "structures" / "ok_b2.toml").read_bytes())
    argv = ["model", str(s), "--phase", "B2_X", "--host", "FE", "--solute", "C", "--site", "octahedral",
            "--output", str(tmp_path / "sub" / ".." / "b2.toml"), "--overwrite"]
    (tmp_path / "sub").mkdir()
    before = _files(tmp_path)
    _refused(_run(argv, tmp_path), "is the input")
    assert _files(tmp_path) == before


@pytest.mark.parametrize(
    ("output", "expect"),
    [
        ("/dev/null", "not a regular file"),  # --overwrite onto a device node would replace it
        ("results/", "names a folder"),  # would have written a file called 'results'
        ("folder", "is a folder"),
        ("x" * 250 + ".tdb", "bytes; at most"),  # the temporary name would be too long, found only after work
    ],
    ids=["device-node", "trailing-slash", "folder", "name-too-long"],
)
def test_model_output_refused_before_work(output: str, expect: str, tmp_path: Path) -> None:
    (tmp_path / "folder").mkdir()
    before = _files(tmp_path)
    _refused(_run([*_BLOCK, "--output", output, "--overwrite"], tmp_path), expect)
    assert _files(tmp_path) == before
    assert Path("/dev/null").is_char_device()


def test_dangling_symlink_needs_overwrite(tmp_path: Path) -> None:
    """A dangling link is refused without --overwrite; with it the link's target is written (the link stays)."""
    link = tmp_path / "out.tdb"
    link.symlink_to(tmp_path / "missing.tdb")
    before = _files(tmp_path)
    _refused(_run([*_BLOCK, "--output", "out.tdb"], tmp_path), "symbolic link to a missing file")
    assert _files(tmp_path) == before
    proc = _run([*_BLOCK, "--output", "out.tdb", "--overwrite"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert link.is_symlink() and "PHASE FCC_X" in (tmp_path / "missing.tdb").read_text()


def test_two_outputs_that_are_one_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """`--csv out.dat --netcdf ./out.dat`: compared as real paths, not strings."""
    monkeypatch.chdir(tmp_path)
    with pytest.raises(OutputError, match=r"outputs 'out.dat' and './out.dat' are one file"):
        check_outputs(["out.dat", "./out.dat"])
    (tmp_path / "sub").mkdir()
    (tmp_path / "alias").symlink_to(tmp_path / "sub")
    with pytest.raises(OutputError, match="are one file"):
        check_outputs(["sub/a.csv", "alias/a.csv"])
    assert sorted(os.listdir(tmp_path)) == ["alias", "sub"]


def test_output_that_is_an_input(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """`--csv db.tdb --overwrite` (and `sweep --csv job.toml`) would replace the command's input."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "db.tdb").write_text("x")
    with pytest.raises(OutputError, match=r"output file 'db.tdb' is the input"):
        check_output_path("db.tdb", overwrite=True, inputs=["./db.tdb", None, "fe-c"])
    assert check_outputs(["a.csv", "a.nc"], ["db.tdb"]) == [tmp_path.resolve() / "a.csv", tmp_path.resolve() / "a.nc"]


# ---------------------------------------------------------------------------------------------- all or none
def test_all_outputs_or_none_on_error(tmp_path: Path) -> None:
    (tmp_path / "b.nc").write_text("old")

    def fail(tmp: Path) -> None:
        raise RuntimeError("disk on fire")

    with pytest.raises(RuntimeError), atomic_outputs() as out:
        out.write_text(tmp_path / "a.csv", "new")
        out.write(tmp_path / "b.nc", fail)
    assert sorted(os.listdir(tmp_path)) == ["b.nc"]  # no a.csv, no temporaries
    assert (tmp_path / "b.nc").read_text() == "old"


def test_all_outputs_or_none_on_ctrl_c(tmp_path: Path) -> None:
    with pytest.raises(KeyboardInterrupt), atomic_outputs() as out:
        out.write_text(tmp_path / "a.csv", "new")
        raise KeyboardInterrupt
    assert os.listdir(tmp_path) == []


def test_all_outputs_written_together(tmp_path: Path) -> None:
    (tmp_path / "b.nc").write_text("old")
    with atomic_outputs() as out:
        out.write_text(tmp_path / "a.csv", "A")
        out.write_text(tmp_path / "b.nc", "B")
        assert not (tmp_path / "a.csv").exists()  # nothing renamed before the end of the block
    assert {p.name: p.read_text() for p in tmp_path.iterdir()} == {"a.csv": "A", "b.nc": "B"}


def test_sigterm_between_two_outputs_leaves_none(tmp_path: Path) -> None:
    """SIGTERM after the first output is written: no output, no temporary, the old file kept, one line."""
    (tmp_path / "b.nc").write_text("old")
    script = textwrap.dedent(
        f"""
        import os, signal, sys, time
        from solubility._io import atomic_outputs
        try:
            with atomic_outputs() as out:
                out.write_text({str(tmp_path / "a.csv")!r}, "A")
                os.kill(os.getpid(), signal.SIGTERM)
                time.sleep({TIME_BOUND})
                out.write_text({str(tmp_path / "b.nc")!r}, "B")
        except KeyboardInterrupt as exc:
            print(f"error: {{exc}}", file=sys.stderr)
            sys.exit(128 + signal.SIGTERM)
        """
    )
    proc = subprocess.run(
        [sys.executable, "-c", script], env={**os.environ, "PYTHONPATH": str(ROOT)}, capture_output=True,
        text=True, timeout=TIME_BOUND, check=False,
    )
    assert proc.returncode == 128 + signal.SIGTERM, proc.stderr
    assert proc.stderr.strip() == "error: terminated (SIGTERM); no output was written"
    assert sorted(os.listdir(tmp_path)) == ["b.nc"]
    assert (tmp_path / "b.nc").read_text() == "old"


# ---------------------------------------------------------------------------------------------- databases
def _params(db) -> list[tuple]:
    from tinydb import Query

    rows = db.search(Query().noop())
    return sorted(
        (p["parameter_type"], p["phase_name"], str(p["constituent_array"]), p["parameter_order"], str(p["parameter"]))
        for p in rows
    )


@pytest.mark.parametrize(
    "variant",
    ["crlf", "cr", "bom", "tabs", "dollar-comments"],
)
def test_text_variants_read_as_pycalphad_reads_the_file(variant: str, tmp_path: Path) -> None:
    """Reference: pycalphad's own Database(path) on the original bundled Fe-C file (the same parameters)."""
    from pycalphad import Database

    original = ROOT / "solubility" / "databases" / "cfe_broshe.tdb"
    text = original.read_text(encoding="utf-8")
    lines = text.split("\n")
    changed = {
        "crlf": "\r\n".join(lines),
        "cr": "\r".join(lines),
        "bom": "\ufeff" + text,
        "tabs": "\n".join(ln.replace(" ", "\t", 1) for ln in lines),
        "dollar-comments": "\n".join(f"{ln} $ a trailing comment" if ln.strip() else ln for ln in lines),
    }[variant]
    p = tmp_path / f"{variant}.tdb"
    p.write_bytes(changed.encode("utf-8"))
    ours = load_database(p)
    ref = Database(str(original))
    assert sorted(ours.db.phases) == sorted(ref.phases)
    assert _params(ours.db) == _params(ref)


def test_repeated_parameter_is_what_pycalphad_counts_twice() -> None:
    """Why the refusal: pycalphad itself keeps both copies of the repeated line (so G would double)."""
    from pycalphad import Database

    text = (DATA / "databases" / "repeated_parameter.tdb").read_text(encoding="utf-8")
    with warnings.catch_warnings():  # pycalphad's own note on the '%' type character without TYPE_DEFINITION
        warnings.simplefilter("ignore", UserWarning)
        db = Database.from_string(text, fmt="tdb")
    rows = [p for p in _params(db) if p[:2] == ("G", "FCC_A1")]
    assert len(rows) == 2 and rows[0] == rows[1]
    with pytest.raises(DatabaseError, match="repeated verbatim"):
        load_database(DATA / "databases" / "repeated_parameter.tdb")


def test_undefined_function_is_recorded(tmp_path: Path) -> None:
    """A misspelt FUNCTION (GHSERFFE) is taken as zero by pycalphad: recorded at load (the warning comes where a
    chosen phase uses it, tests/test_ordering_checks.py), so a large database with a few such names still loads."""
    text = (DATA / "databases" / "repeated_parameter.tdb").read_text(encoding="utf-8").splitlines()
    text = [ln for ln in text if "PARAMETER" not in ln]
    text.append(" PARAMETER G(FCC_A1,FE:VA;0)  298.15 +GHSERFFE#; 6000 N !")
    p = tmp_path / "misspelt.tdb"
    p.write_text("\n".join(text) + "\n", encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ldb = load_database(p)
    assert ldb.undefined_functions == ("GHSERFFE",)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert load_database("fe-c").undefined_functions == ()
