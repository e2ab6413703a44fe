"""The parsing adapter: the one module of `solubility.databases` that touches pycalphad's internals.

pycalphad's TDB reader (``pycalphad.io.tdb`` in 0.11.2) is used through its public ``Database.from_string``, with
three private hooks installed under a lock for the duration of one parse, and one read of its stack frame:

* its expression function (``_sympify_string``) is wrapped so that `solubility.databases.guard.check_expression`
  runs again on every string it would hand to SymEngine (defence in depth behind the text guard);
* its command table (``_TDB_PROCESSOR``) is wrapped for PHASE and PARAMETER, so that a phase declared twice and a
  parameter given twice (repeated verbatim, or with another value) are refused with the command's line; pycalphad
  itself keeps the second phase and adds both parameters (a repeated G parameter is counted twice);
* when the reader fails, the line of the failing command is found from the reader's local ``char_idx``.

Where a private name is missing (another pycalphad version) that hook is skipped and only the text guards apply.
The other adapter, for compiled Gibbs energy functions, is `solubility.thermo.system` (DEVELOPERS.md).
"""

from __future__ import annotations

import contextlib
import copy
import hashlib
import io
import threading
import warnings
from collections.abc import Iterator
from typing import Any

from solubility.databases.guard import check_expression
from solubility.errors import DatabaseError

__all__ = ["all_parameters", "copy_database", "database_digest", "function_faults", "parse_tdb"]

_PARSE_LOCK = threading.Lock()
#: names in expressions that are not FUNCTIONs: the state variables pycalphad substitutes itself
_STATE_VARIABLES = frozenset({"T", "P"})


def _parameter_name(param_type: str, phase: str, constituents: Any, order: Any, diffusing: Any = None) -> str:
    """``G(FCC_A1,FE:C;0)`` as a TDB file writes it."""
    subls = ":".join(",".join(str(getattr(c, "name", c)).upper() for c in sub) for sub in constituents)
    dname = getattr(diffusing, "name", diffusing)
    diff = f"&{dname}" if dname and str(dname) != "None" else ""
    return f"{param_type}{diff}({phase.upper()},{subls};{order})"


@contextlib.contextmanager
def _hooked_reader() -> Iterator[None]:
    """Install the expression check and the duplicate checks on pycalphad's TDB reader for one parse."""
    try:
        from pycalphad.io import tdb as tdb_module

        original_sympify = tdb_module._sympify_string
        processors = tdb_module._TDB_PROCESSOR
    except (ImportError, AttributeError):
        yield
        return
    seen_phases: set[str] = set()
    seen_params: dict[tuple, Any] = {}

    def guarded_sympify(math_string: str) -> object:
        check_expression(math_string)
        return original_sympify(math_string)

    original_phase = processors.get("PHASE")
    original_param = processors.get("PARAMETER")

    def phase(db: Any, name: str, *args: Any) -> Any:
        phase_name = str(name).split(":")[0].upper()
        if phase_name in seen_phases:
            raise DatabaseError(f"PHASE {phase_name} is declared twice; keep one declaration")
        seen_phases.add(phase_name)
        return original_phase(db, name, *args)

    def parameter(db: Any, param_type: str, phase_name: str, diffusing: Any, constituents: Any, order: Any,
                  param: Any, *args: Any) -> Any:
        subls = tuple(tuple(sorted(str(c).upper() for c in sub)) for sub in constituents.as_list())
        key = (str(param_type).upper(), str(phase_name).upper(), subls, int(order), str(diffusing or "").upper())
        if key in seen_params:
            name = _parameter_name(key[0], key[1], subls, key[3], key[4] or None)
            how = "repeated verbatim (pycalphad would count it twice)" if seen_params[key] == param else \
                "given twice with different values"
            raise DatabaseError(f"PARAMETER {name} is {how}; keep one")
        seen_params[key] = param
        return original_param(db, param_type, phase_name, diffusing, constituents, order, param, *args)

    with _PARSE_LOCK:
        tdb_module._sympify_string = guarded_sympify
        if original_phase is not None:
            processors["PHASE"] = phase
        if original_param is not None:
            processors["PARAMETER"] = parameter
        try:
            yield
        finally:
            tdb_module._sympify_string = original_sympify
            if original_phase is not None:
                processors["PHASE"] = original_phase
            if original_param is not None:
                processors["PARAMETER"] = original_param


def parse_tdb(text: str, label: str) -> tuple[Any, tuple[str, ...]]:
    """Parse TDB text (already through `guard_tdb_text`) with pycalphad; every failure is a DatabaseError.

    Returns
    -------
    db, messages
        The pycalphad Database, and what its parser warned or printed while reading (kept, not shown).

    Raises
    ------
    DatabaseError
        ``"{label}, line N: ..."`` for invalid syntax, an expression refused by the guards, a phase declared twice,
        a parameter given twice, a FUNCTION defined twice, or any other failure of the reader.
    """
    from pycalphad import Database
    from pyparsing import ParseBaseException

    sink = io.StringIO()
    with _hooked_reader(), warnings.catch_warnings(record=True) as caught, contextlib.redirect_stdout(sink):
        warnings.simplefilter("always")
        try:
            db = Database.from_string(text, fmt="tdb")
        except ParseBaseException as exc:
            line = getattr(exc, "lineno", None)
            where = f", line {line}" if line else ""
            raise DatabaseError(f"{label}{where}: invalid TDB syntax near {_context(exc)!r}") from None
        except RecursionError:
            raise DatabaseError(f"{label}: an expression is nested too deeply to parse") from None
        except MemoryError:
            raise DatabaseError(f"{label}: not enough memory to parse the database") from None
        except Exception as exc:
            line = _failing_line(exc, text)
            where = f", line {line}" if line else ""
            if isinstance(exc, DatabaseError):  # from a hook
                raise DatabaseError(f"{label}{where}: {exc}") from None
            raise DatabaseError(f"{label}{where}: cannot be read ({type(exc).__name__}: {_short(exc)})") from None
    messages = [str(w.message) for w in caught] + [s for s in sink.getvalue().splitlines() if s.strip()]
    return db, tuple(messages)


def _context(exc: Any) -> str:
    """The start of the command pycalphad could not parse (its message holds it on the second line)."""
    lines = [ln.strip() for ln in str(getattr(exc, "msg", "")).splitlines() if ln.strip()]
    text = lines[1] if len(lines) > 1 else (lines[0] if lines else "")
    return text[:60] + ("..." if len(text) > 60 else "")


def _short(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else "no detail"
    return text[:160]


def _failing_line(exc: BaseException, text: str) -> int | None:
    """Line of the command pycalphad's reader was processing when `exc` was raised, where it can be found."""
    tb = exc.__traceback__
    char_idx = None
    while tb is not None:
        frame = tb.tb_frame
        if frame.f_code.co_name == "read_tdb" and "char_idx" in frame.f_locals:
            char_idx = frame.f_locals["char_idx"]
        tb = tb.tb_next
    if not isinstance(char_idx, int):
        return None
    # pycalphad keeps each line up to its first '!' (comments cut), joins them with one space, and counts
    # char_idx in that string up to the start of the failing command
    bodies = []
    for line in text.upper().replace("\t", " ").split("\n"):
        body = line.split("$", 1)[0]
        bodies.append(body.split("!")[0] + ("!" if len(body.split("!")) > 1 else ""))
    joined = " ".join(bodies)
    idx = char_idx
    while idx < len(joined) and joined[idx].isspace():
        idx += 1
    pos = 0
    for lineno, body in enumerate(bodies, start=1):
        pos += len(body) + 1
        if pos > idx:
            return lineno
    return None


def all_parameters(db: Any) -> list[dict[str, Any]]:
    """Every parameter row of a parsed Database (pycalphad keeps them in a TinyDB table)."""
    from tinydb import Query

    return list(db.search(Query().noop()))


def function_faults(db: Any) -> tuple[dict[str, tuple[str, ...]], tuple[str, ...] | None]:
    """FUNCTIONs referenced but never defined, and the first chain of FUNCTIONs that refers back to itself.

    Returns
    -------
    undefined
        Undefined name -> sorted names of the FUNCTIONs and parameters that use it (pycalphad takes it as zero).
    cycle
        ``("A", "B", "A")`` for A -> B -> A (``("A", "A")`` when A uses itself), or None.
    """
    refs: dict[str, set[str]] = {}
    for name, expr in db.symbols.items():
        refs[str(name)] = {str(s) for s in getattr(expr, "free_symbols", ())} - _STATE_VARIABLES
    undefined: dict[str, set[str]] = {}
    for name, used in refs.items():
        for u in used - set(refs):
            undefined.setdefault(u, set()).add(name)
    for p in all_parameters(db):
        for s in getattr(p["parameter"], "free_symbols", ()):
            if str(s) not in refs and str(s) not in _STATE_VARIABLES:
                pname = _parameter_name(p["parameter_type"], p["phase_name"], p["constituent_array"],
                                        p["parameter_order"], p.get("diffusing_species"))
                undefined.setdefault(str(s), set()).add(pname)
    return {k: tuple(sorted(v)) for k, v in sorted(undefined.items())}, _first_cycle(refs)


def _first_cycle(refs: dict[str, set[str]]) -> tuple[str, ...] | None:
    """Depth-first search (iterative: chains may be long) for a cycle among defined FUNCTIONs."""
    state: dict[str, int] = {}  # 1 on the current path, 2 done
    for root in sorted(refs):
        if state.get(root):
            continue
        path = [root]
        stack = [iter(sorted(refs[root] & refs.keys()))]
        state[root] = 1
        while stack:
            nxt = next(stack[-1], None)
            if nxt is None:
                state[path.pop()] = 2
                stack.pop()
                continue
            if state.get(nxt) == 1:
                return (*path[path.index(nxt):], nxt)
            if not state.get(nxt):
                state[nxt] = 1
                path.append(nxt)
                stack.append(iter(sorted(refs[nxt] & refs.keys())))
    return None


def copy_database(db: Any) -> Any:
    """A copy safe to extend: pycalphad 0.11.2's ``Database.__deepcopy__`` copies only the parameter table and
    shares ``phases``, ``symbols``, ``species`` ... with the original, so those containers are copied here."""
    new = copy.deepcopy(db)
    for key, value in list(vars(new).items()):
        if isinstance(value, dict | set | list):
            setattr(new, key, copy.copy(value))
    return new


def database_digest(db) -> str:
    """sha256 of an in-memory pycalphad Database's content: elements, species, reference states, phases (site
    ratios, constituents, model hints), every parameter and every symbol. Equal content gives an equal digest;
    a database changed in place gives a new one."""
    h = hashlib.sha256()

    def put(*items: object) -> None:
        for item in items:
            h.update(repr(item).encode())
            h.update(b"\x1f")

    put(sorted(map(str, db.elements)), sorted(repr(sp) for sp in db.species))
    put(sorted((str(k), sorted((str(a), repr(b)) for a, b in dict(v).items())) for k, v in db.refstates.items()))
    for name in sorted(db.phases):
        ph = db.phases[name]
        put(name, tuple(float(r) for r in ph.sublattices),
            tuple(tuple(sorted(repr(sp) for sp in subl)) for subl in ph.constituents),
            sorted((str(k), repr(v)) for k, v in ph.model_hints.items()))
    params = sorted(repr(sorted((str(k), str(v)) for k, v in p.items())) for p in db._parameters.all())
    put(params)
    put(sorted((str(k), str(v)) for k, v in db.symbols.items()))
    return h.hexdigest()
