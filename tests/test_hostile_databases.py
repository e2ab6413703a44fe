"""Hostile database files (issue 6, item 2): loading succeeds or raises the tool's own error, never hangs,
never runs code it was handed.  Property tests (hypothesis) mutate real TDB files shipped with pycalphad and
generate random ones: random bytes, enormous numbers and exponents, deeply nested and huge expressions, and
expressions that look like Python calls of builtins (``__import__('os').system('touch MARKER')``). Each file
is loaded in a separate worker process, so a hang in compiled code cannot stall the test run: the only time
measurement is the worker timeout (`_TIMEOUT_S`), which bounds a hang and asserts no performance. The worker
runs in its own folder, where the payloads would create their marker file; the test checks it is never
created. TDB text is upper-cased by the reader, so every payload names an upper-case relative marker file.
"""

from __future__ import annotations

import multiprocessing
import os
import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from solubility.databases.reader import MAX_NESTING, check_expression, guard_tdb_text, load_database
from solubility.errors import DatabaseError

_TIMEOUT_S = 120  # bounds a hang only: the guarded files here are small and parse in well under a second
_MARKER = "PWNED_MARKER"
_BASES = ("femn.tdb", "crfe_bcc_magnetic.tdb", "cumg.tdb")  # small open TDB files shipped with pycalphad
_SETTINGS = settings(
    max_examples=40,
    deadline=None,
    derandomize=True,  # the same files on every run, so CI results are reproducible
    suppress_health_check=[
        HealthCheck.too_slow,
        HealthCheck.function_scoped_fixture,
        HealthCheck.data_too_large,
    ],
)


def _probe(path: str) -> tuple[str, str, str]:
    """Worker: load `path`; report ("ok"|"own"|"foreign", exception type, message)."""
    from solubility.databases.reader import clear_cache
    from solubility.errors import SolubilityError

    clear_cache()
    try:
        load_database(path)
    except SolubilityError as exc:
        return "own", type(exc).__name__, str(exc)[:300]
    except BaseException as exc:
        return "foreign", type(exc).__name__, str(exc)[:300]
    return "ok", "", ""


def _init_worker(folder: str) -> None:
    os.chdir(folder)


class _Worker:
    """One spawned process, restarted after a timeout."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.ctx = multiprocessing.get_context("spawn")
        self.pool = self._start()

    def _start(self):
        return self.ctx.Pool(1, initializer=_init_worker, initargs=(str(self.folder),))

    def load(self, path: Path) -> tuple[str, str, str]:
        result = self.pool.apply_async(_probe, (str(path),))
        try:
            return result.get(timeout=_TIMEOUT_S)
        except multiprocessing.TimeoutError:
            self.pool.terminate()
            self.pool = self._start()
            return "timeout", "", f"no answer within {_TIMEOUT_S} s"

    def close(self) -> None:
        self.pool.terminate()
        self.pool.join()


@pytest.fixture(scope="module")
def worker(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile_cwd")
    w = _Worker(folder)
    yield w
    w.close()


@pytest.fixture(scope="module")
def base_texts(pycalphad_db_dir) -> list[str]:
    return [(pycalphad_db_dir / name).read_text(encoding="utf-8") for name in _BASES]


_COUNTER = {"n": 0}


def _check_file(worker: _Worker, folder: Path, data: bytes) -> tuple[str, str, str]:
    _COUNTER["n"] += 1
    path = folder / f"case{_COUNTER['n']}.tdb"
    path.write_bytes(data)
    outcome = worker.load(path)
    path.unlink()
    assert outcome[0] in ("ok", "own"), outcome
    assert not list(worker.folder.glob(f"{_MARKER}*")), "a payload ran: marker file created"
    assert not list(worker.folder.glob(f"{_MARKER.lower()}*")), "a payload ran: marker file created"
    return outcome


# ---- payloads ------------------------------------------------------------------------------------------
_PY_CALLS = [
    f"__import__('os').system('touch {_MARKER}')",
    "__import__('os')",
    f"eval(\"__import__('os').system('touch {_MARKER}')\")",
    f'exec(\'open("{_MARKER}","w")\')',
    f"open('{_MARKER}', 'w')",
    "getattr(__builtins__, 'eval')('1')",
    "().__class__.__bases__[0].__subclasses__()",
    f"(lambda: __import__('os').system('touch {_MARKER}'))()",
    "compile('1', 'x', 'eval')",
    f"[x for x in __import__('os').popen('touch {_MARKER}')]",
    "globals()",
    "T.__class__",
    "1 if T else 2",
    "T; 6000 N ! FUNCTION X 298.15 __import__('os')",
]

_EXPR_PIECES = st.sampled_from(
    [
        "T",
        "T*LN(T)",
        "GHSERFE#",
        "EXP(T)",
        "1E308",
        "9",
        "(",
        ")",
        "**",
        "^",
        "*",
        "+",
        "-",
        "/",
        ".",
        ",",
        "'",
        "__import__",
        "(",
        "LN(",
        "9**9**9",
        "1" * 60,
        "1E99999",
        "-",
        "LOG(0)",
        "EXP(1E5)",
    ]
)


@st.composite
def _nasty_expression(draw) -> str:
    kind = draw(st.integers(0, 6))
    if kind == 0:
        return draw(st.sampled_from(_PY_CALLS))
    if kind == 1:  # deep nesting
        depth = draw(st.integers(MAX_NESTING - 5, 3000))
        return "(" * depth + "T" + ")" * depth
    if kind == 2:  # power towers and huge constants
        n = draw(st.integers(2, 8))
        base = draw(st.sampled_from(["9", "2", "10", "1.0001", "T", "(9**99)"]))
        return "**".join([base] * n)
    if kind == 3:  # enormous literals
        digits = draw(st.integers(30, 5000))
        return (
            draw(st.sampled_from(["", "-", "+"]))
            + "9" * digits
            + draw(st.sampled_from(["", "E308", "E-400"]))
        )
    if kind == 4:  # huge expressions
        terms = draw(st.integers(100, 8000))
        return "+".join(["T*LN(T)"] * terms)
    if kind == 5:  # long unary chains
        return "-" * draw(st.integers(10, 100_000)) + "1"
    return "".join(draw(st.lists(_EXPR_PIECES, min_size=1, max_size=40)))


def _tdb_with(expr: str, where: int) -> str:
    head = " ELEMENT VA VACUUM 0 0 0 !\n ELEMENT FE BCC_A2 55.847 4489 27.28 !\n TYPE_DEFINITION % SEQ * !\n"
    if where == 0:
        return head + f" FUNCTION GX 298.15 {expr}; 6000 N !\n PHASE A % 1 1 !\n CONSTITUENT A :FE: !\n"
    if where == 1:
        return (
            head + f" PHASE A % 1 1 !\n CONSTITUENT A :FE: !\n PARAMETER G(A,FE;0) 298.15 {expr}; 6000 N !\n"
        )
    if where == 2:
        return (
            head
            + " PHASE A % 1 1 !\n CONSTITUENT A :FE: !\n"
            + f" PARAMETER G(A,FE;0) 298.15 0; 1000 Y {expr}; 6000 N !\n"
        )
    if where == 3:
        return head + f" PHASE {expr} % 1 1 !\n CONSTITUENT A :FE: !\n"
    if where == 4:
        return (
            head
            + f" TYPE_DEFINITION & GES A_P_D A MAGNETIC {expr} !\n PHASE A %& 1 1 !\n CONSTITUENT A :FE: !\n"
        )
    if where == 5:
        return head + f" SPECIES {expr} FE1 !\n PHASE A % 1 1 !\n CONSTITUENT A :FE: !\n"
    # pycalphad accepts any prefix of a keyword ("F" for FUNCTION) and names with parentheses
    return head + f" F(GX) 298.15 {expr}; 6000 N !\n PHASE A % 1 1 !\n CONSTITUENT A :FE: !\n"


# ---- property tests --------------------------------------------------------------------------------------
@_SETTINGS
@given(data=st.binary(min_size=0, max_size=3000))
def test_random_bytes(worker, tmp_path, data):
    _check_file(worker, tmp_path, data)


@_SETTINGS
@given(text=st.text(alphabet=st.characters(codec="utf-8"), max_size=2000))
def test_random_text(worker, tmp_path, text):
    _check_file(worker, tmp_path, text.encode("utf-8"))


@_SETTINGS
@given(expr=_nasty_expression(), where=st.integers(0, 6))
def test_generated_hostile_expressions(worker, tmp_path, expr, where):
    _check_file(worker, tmp_path, _tdb_with(expr, where).encode("utf-8"))


@st.composite
def _mutation(draw, texts: list[str]) -> str:
    text = draw(st.sampled_from(texts))
    rnd = random.Random(draw(st.integers(0, 2**32 - 1)))
    for _ in range(draw(st.integers(1, 4))):
        n = len(text)
        i, j = sorted((rnd.randrange(n + 1), rnd.randrange(n + 1)))
        op = draw(st.integers(0, 5))
        if op == 0:  # delete a slice
            text = text[:i] + text[j:]
        elif op == 1:  # duplicate a slice
            text = text[:j] + text[i:j] + text[j:]
        elif op == 2:  # insert a hostile expression
            text = text[:i] + draw(_nasty_expression()) + text[i:]
        elif op == 3:  # replace one character
            text = text[:i] + draw(st.sampled_from("!$;:()#*,%.'\"\\0 \n")) + text[i + 1 :]
        elif op == 4:  # truncate
            text = text[:i]
        else:  # shuffle lines
            lines = text.split("\n")
            rnd.shuffle(lines)
            text = "\n".join(lines)
    return text


def test_mutated_real_files(worker, tmp_path, base_texts):
    # real files load as they are (the guards refuse nothing in them)
    for text in base_texts:
        assert _check_file(worker, tmp_path, text.encode())[0] == "ok"

    @settings(
        max_examples=60,
        deadline=None,
        derandomize=True,
        suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    )
    @given(text=_mutation(base_texts))
    def mutated(text):
        _check_file(worker, tmp_path, text.encode("utf-8", errors="replace"))

    mutated()


# ---- the guards themselves (in-process, no pycalphad) ------------------------------------------------------
@pytest.mark.parametrize("expr", _PY_CALLS)
def test_python_calls_are_refused_by_the_guard(expr):
    with pytest.raises(DatabaseError):
        check_expression(expr.upper())


@pytest.mark.parametrize(
    ("expr", "match"),
    [
        ("9**9**9", "exponent"),
        ("((9**99)**99)**99", "out of range"),
        ("1E999", "out of range"),
        ("9" * 50, "digits"),
        ("(" * 100 + "1" + ")" * 100, "nested"),
        ("-" * 1000 + "1", "nested"),
        ("+".join(["T"] * 20000), "characters"),
        ("EXP(1E5)", "out of range"),
        ("LN(0)", "undefined"),
        ("1/0", "undefined"),
        ("T.REAL", "not accepted"),
        ("SYSTEM(1)", "call of 'SYSTEM'"),
        ("(T", "ends too early"),
        ("T T", "unexpected"),
    ],
)
def test_guard_limits(expr, match):
    with pytest.raises(DatabaseError, match=match):
        check_expression(expr)


@pytest.mark.parametrize(
    "expr",
    [
        "+1225.7+124.134*T-23.5143*T*LN(T)-.00439752*T**2-5.8927E-08*T**3+77359*T**(-1)",  # SGTE GHSERFE form
        "-1.230524E+28*T**(-9)",
        "+GHSERFE#+3*GHSERCC#+322050+75.667*T",
        "+.5*EXP(.5*AM3FE7C3#)+.5*AM1FE7C3#",
        "+R#*T*LN(IEA9C1#)",
        "-T*LOG(10)",
        "0",
    ],
)
def test_guard_accepts_real_expressions(expr):
    check_expression(expr)  # forms from cfe_broshe.tdb and the SGTE unary data (Dinsdale 1991)


def test_guard_accepts_every_shipped_pycalphad_tdb(pycalphad_db_dir):
    for path in sorted(pycalphad_db_dir.glob("*.tdb")):
        guard_tdb_text(path.read_text(encoding="utf-8", errors="replace"), source=path.name)


def test_guard_reports_the_line(tmp_path):
    text = (
        " ELEMENT FE BCC_A2 55.847 4489 27.28 !\n\n FUNCTION A 298.15 1; 6000 N !\n"
        " FUNCTION B 298.15\n  +__import__('os'); 6000 N !\n"
    )
    with pytest.raises(DatabaseError, match=r"x\.tdb, line 4: character"):
        guard_tdb_text(text, source="x.tdb")


@pytest.mark.parametrize(
    "command",
    [
        " F GX 298.15 9**9**9; 6000 N !",  # keyword abbreviated to one letter
        " F(GX) 298.15 9**9**9; 6000 N !",  # keyword ended by '(' (pycalphad's keyword ends at ' ():,')
        " FU GX,,9**9**9; 6000 N !",  # low temperature limit left out
        " PA G(A,FE;0) 298.15 0; 1000 Y 9**9**9; 6000 N !",
        " PARAMETER G(A,FE;0),, 9**9**9; 6000 N !",
    ],
)
def test_guard_finds_expressions_in_abbreviated_commands(command):
    with pytest.raises(DatabaseError, match="exponent"):
        guard_tdb_text(" ELEMENT FE BCC_A2 55.847 4489 27.28 !\n" + command + "\n", source="x.tdb")


def test_hook_guards_what_pycalphad_evaluates(tmp_path, monkeypatch):
    # with the text guard switched off, the hook on pycalphad's expression function still refuses the power
    import solubility.databases.reader as database

    monkeypatch.setattr(database, "guard_tdb_text", lambda *args, **kwargs: None)
    p = tmp_path / "hook.tdb"
    p.write_text(" ELEMENT FE BCC_A2 55.847 4489 27.28 !\n\n F GX 298.15 9**9**9; 6000 N !\n")
    with pytest.raises(DatabaseError, match=r"hook\.tdb, line 3: power with exponent"):
        load_database(p)
