"""Open a TDB database with clear errors, guard the parse against hostile files, record provenance.

`load_database` takes a path, the name of a bundled database (`bundled_databases`) or a pycalphad Database.
Before any text reaches pycalphad's parser it passes guards (`guard_tdb_text`): a size limit, a limit on the
length of each command and expression, and a whitelist grammar for every FUNCTION and PARAMETER expression
(numbers, names, the operators ``+ - * / ** ^``, parentheses and the functions LN, LOG and EXP; nesting depth,
literal size and constant powers bounded). Why: pycalphad 0.11.2 checks an expression against an AST whitelist
that admits calls of any name and then hands it to ``symengine.sympify``, which parses strings with
SymEngine's own C++ parser, not Python's ``eval`` (``__import__('os')`` passes pycalphad's whitelist and is
then refused by SymEngine as an unknown token; no code runs). No path to Python evaluation was found, but
constant subexpressions are evaluated exactly (pycalphad took 11 s on ``9**9**9`` here), and deep nesting
reaches Python's recursion limits; the guards refuse both, and anything that looks like a Python call.

Parsed Databases are cached in-process per (resolved path, sha256), and on disk across runs by the file's
sha256 (`solubility.databases.parse_cache`): parsing a TDB costs seconds.
pycalphad is imported inside the functions that need it.
"""

from __future__ import annotations

import contextlib
import copy
import difflib
import hashlib
import io
import json
import os
import threading
import warnings
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from solubility.databases.guard import (
    MAX_COMMAND_CHARS,
    MAX_EXPRESSION_CHARS,
    MAX_NESTING,
    check_expression,
    guard_tdb_text,
    split_ranges,
)
from solubility.errors import DatabaseError, DatabaseNotFoundError, InputError

if TYPE_CHECKING:  # pragma: no cover
    from pycalphad import Database

    from solubility.databases.audit import AuditRow
    from solubility.models.sublattice import SublatticeModel

__all__ = [
    "MAX_COMMAND_CHARS",
    "MAX_EXPRESSION_CHARS",
    "MAX_FILE_BYTES",
    "MAX_NESTING",
    "LoadedDatabase",
    "add_model",
    "audit_database",
    "bundled_databases",
    "check_elements",
    "check_expression",
    "check_phases",
    "check_species",
    "components_for",
    "element_data",
    "guard_tdb_text",
    "load_database",
    "split_ranges",
]

#: largest database file read, bytes (the largest open TDB files are a few MB; pycalphad parses ~0.1 MB/s)
MAX_FILE_BYTES = 16 * 1024 * 1024
_INDEX_FILE = "index.json"
_CACHE: dict[tuple[str, str], LoadedDatabase] = {}
_CACHE_LOCK = threading.Lock()


# ------------------------------------------------------------------------------------------------------
# results
@dataclass(frozen=True)
class LoadedDatabase:
    """A parsed database and where it came from.

    Attributes
    ----------
    db
        The pycalphad Database (shared through the cache: do not mutate it; `add_model` returns a copy).
    name
        Bundled name, file name, or ``<in memory>``.
    path
        Resolved file path, or None for an in-memory Database.
    sha256
        Hex digest of the file's bytes, or None.
    elements, phases
        Sorted upper-case names (VA and the electron gas ``/-`` included among elements where declared).
    warnings
        Messages pycalphad's parser warned about while reading (kept, not shown).
    """

    db: Database
    name: str
    path: Path | None
    sha256: str | None
    elements: tuple[str, ...]
    phases: tuple[str, ...]
    warnings: tuple[str, ...] = field(default=(), compare=False)

    def sublattices(self, phase: str) -> tuple[tuple[float, ...], tuple[tuple[str, ...], ...]]:
        """Site ratios and the sorted species names on each sublattice of `phase`."""
        (name,) = check_phases(self, [phase])
        ph = self.db.phases[name]
        ratios = tuple(float(s) for s in ph.sublattices)
        species = tuple(tuple(sorted(sp.name for sp in subl)) for subl in ph.constituents)
        return ratios, species

    def provenance(self) -> dict[str, Any]:
        """JSON-safe provenance: name, path, sha256, elements, every phase's site ratios and constituents."""
        phases = {}
        for p in self.phases:
            ratios, species = self.sublattices(p)
            phases[p] = {"site_ratios": list(ratios), "constituents": [list(s) for s in species]}
        return {
            "name": self.name,
            "path": None if self.path is None else str(self.path),
            "sha256": self.sha256,
            "elements": list(self.elements),
            "phases": phases,
        }


# ------------------------------------------------------------------------------------------------------
# bundled databases
def _bundled_dir() -> Path:
    return Path(__file__).resolve().parent


def bundled_databases() -> list[dict[str, str]]:
    """The open databases shipped with the tool.

    Returns
    -------
    list of dict
        One per database: ``name``, ``file``, ``description``, ``citation``, ``licence``, ``source``,
        ``changes`` and ``sha256`` (of the bundled file), in the order of ``databases/index.json``.
    """
    index = _bundled_dir() / _INDEX_FILE
    try:
        entries = json.loads(index.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise DatabaseError(f"the index of bundled databases {str(index)!r} cannot be read: {exc}") from None
    return [dict(e) for e in entries]


def _bundled_path(name: str) -> Path | None:
    for entry in bundled_databases():
        if entry["name"].lower() == name.strip().lower() or entry["file"].lower() == name.strip().lower():
            return _bundled_dir() / entry["file"]
    return None


# ------------------------------------------------------------------------------------------------------
# reading
def _read_bytes(path: Path, label: str, max_bytes: int) -> bytes:
    if path.is_dir():
        raise DatabaseError(f"database {label!r} is a folder; give a TDB file")
    if not path.is_file():  # a FIFO or device would block or never end
        raise DatabaseError(f"database {label!r} is not a regular file; give a TDB file")
    try:
        size = path.stat().st_size
        if size > max_bytes:
            raise DatabaseError(f"database {label!r} is {size} bytes; at most {max_bytes} are read")
        with open(path, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise DatabaseError(f"database {label!r} cannot be read: {exc.strerror or exc}") from None
    if len(data) > max_bytes:
        raise DatabaseError(f"database {label!r} is larger than {max_bytes} bytes")
    return data


def _decode(data: bytes, label: str) -> str:
    if not data.strip():
        raise DatabaseError(f"database {label!r} is empty")
    if b"\x00" in data:
        raise DatabaseError(f"database {label!r} is a binary file (NUL bytes), not TDB text")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        text = data.decode("latin-1")
    control = sum(1 for ch in text if ord(ch) < 32 and ch not in "\t\n\r\f\v")
    if control > max(8, len(text) // 100):
        raise DatabaseError(f"database {label!r} looks binary ({control} control characters), not TDB text")
    return text


def _resolve(spec: str | os.PathLike) -> tuple[Path, str]:
    text = os.fspath(spec)
    if not str(text).strip():
        raise DatabaseNotFoundError(
            "empty database name; give a TDB file or a bundled name (solubility databases)"
        )
    path = Path(text).expanduser()
    try:
        exists = path.exists()
    except (OSError, ValueError):  # a NUL byte or an over-long name
        exists = False
    if exists:  # an existing path wins over a bundled name
        return path.resolve(), path.name
    bundled = _bundled_path(str(text))
    if bundled is not None:
        return bundled.resolve(), str(text).strip().lower()
    names = [e["name"] for e in bundled_databases()]
    close = difflib.get_close_matches(str(text).lower(), names, n=3)
    hint = f"; did you mean {', '.join(close)}?" if close else ""
    raise DatabaseNotFoundError(
        f"database {str(text)[:200]!r} is neither an existing file nor a bundled database "
        f"({', '.join(names)}){hint}"
    )


def load_database(spec: str | os.PathLike | Database, *, max_bytes: int = MAX_FILE_BYTES) -> LoadedDatabase:
    """Open a TDB database by path or bundled name (or wrap a pycalphad Database).

    Parameters
    ----------
    spec
        A TDB file path, a bundled name (``solubility databases``), or a pycalphad Database.
    max_bytes
        Largest file read.

    Returns
    -------
    LoadedDatabase
        Cached per (resolved path, sha256): a second call on an unchanged file returns the same object.

    Raises
    ------
    DatabaseNotFoundError
        No such file and no such bundled database.
    DatabaseError
        A folder, an empty, binary, oversized or unparsable file (with the line where known), an expression
        that breaks the guards, a database without phases or with a phase lacking constituents.
    """
    if not isinstance(spec, str | os.PathLike):
        return _wrap_database(spec)
    path, label = _resolve(spec)
    data = _read_bytes(path, label, max_bytes)
    digest = hashlib.sha256(data).hexdigest()
    key = (str(path), digest)
    with _CACHE_LOCK:
        cached = _CACHE.get(key)
    if cached is not None:
        return cached
    text = _decode(data, label)
    from solubility.databases.parse_cache import cached_parse  # parsed once, reused across runs

    db, messages = cached_parse(digest, lambda: _parse_text(text, label))
    loaded = _make_loaded(db, label, path, digest, messages)
    with _CACHE_LOCK:
        _CACHE[key] = loaded
    return loaded


def clear_cache() -> None:
    """Forget every cached Database (for tests and long sessions)."""
    with _CACHE_LOCK:
        _CACHE.clear()


def _wrap_database(db: Any) -> LoadedDatabase:
    from pycalphad import Database

    if not isinstance(db, Database):
        raise InputError(f"database {db!r} is not a path, a bundled name or a pycalphad Database")
    return _make_loaded(db, "<in memory>", None, None, ())


def _make_loaded(
    db: Any, name: str, path: Path | None, digest: str | None, messages: Sequence[str]
) -> LoadedDatabase:
    _check_parsed(db, name)
    return LoadedDatabase(
        db=db,
        name=name,
        path=path,
        sha256=digest,
        elements=tuple(sorted(str(e).upper() for e in db.elements)),
        phases=tuple(sorted(db.phases)),
        warnings=tuple(messages),
    )


def _check_parsed(db: Any, name: str) -> None:
    if not db.phases:
        raise DatabaseError(f"database {name!r} defines no phases")
    for pname, phase in db.phases.items():
        cons = getattr(phase, "constituents", ()) or ()
        if len(cons) != len(phase.sublattices) or any(len(s) == 0 for s in cons):
            raise DatabaseError(
                f"database {name!r}: phase {pname!r} has {len(phase.sublattices)} sublattices but no "
                "complete "
                "CONSTITUENT line"
            )


def _parse_text(text: str, label: str) -> tuple[Any, tuple[str, ...]]:
    """Guard, then parse TDB text with pycalphad; every failure becomes a DatabaseError naming `label`."""
    guard_tdb_text(text, source=label)
    from pycalphad import Database
    from pyparsing import ParseBaseException

    from solubility.thermo.system import checked_expressions

    sink = io.StringIO()
    with checked_expressions(check_expression), warnings.catch_warnings(record=True) as caught, \
            contextlib.redirect_stdout(sink):
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
            if isinstance(exc, DatabaseError):  # from the expression hook
                raise DatabaseError(f"{label}{where}: {exc}") from None
            raise DatabaseError(
                f"{label}{where}: cannot be read ({type(exc).__name__}: {_short(exc)})"
            ) from None
    messages = [str(w.message) for w in caught] + [s for s in sink.getvalue().splitlines() if s.strip()]
    return db, tuple(messages)


def _context(exc: Any) -> str:
    """The start of the command pycalphad could not parse (its message holds it on the second line)."""
    lines = [ln.strip() for ln in str(getattr(exc, "msg", "")).splitlines() if ln.strip()]
    text = lines[1] if len(lines) > 1 else (lines[0] if lines else "")
    return text[:60] + ("..." if len(text) > 60 else "")


def _first_line(text: str) -> str:
    return str(text).strip().splitlines()[0] if str(text).strip() else "no detail"


def _short(exc: BaseException) -> str:
    text = _first_line(str(exc)) if str(exc) else "no detail"
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


# ------------------------------------------------------------------------------------------------------
# checks on a loaded database
def _suggest(name: str, known: Iterable[str]) -> str:
    close = difflib.get_close_matches(name, list(known), n=3, cutoff=0.6)
    return f"; did you mean {', '.join(close)}?" if close else ""


def _check_names(ldb: LoadedDatabase, names: Iterable[str], what: str, known: Sequence[str],
                 shown: Sequence[str] | None = None, listed: bool = True) -> tuple[str, ...]:
    """Upper-case `names` and check each is in `known`; DatabaseError naming the first that is not.

    The message suggests close matches among `shown` (default `known`) and, if `listed`, lists them.
    """
    shown = known if shown is None else shown
    out = []
    for n in names:
        name = str(n).strip().upper()
        if name not in known:
            listing = f" ({what}s: {', '.join(shown)})" if listed else ""
            raise DatabaseError(f"{what} {n!r} is not in database {ldb.name!r}{_suggest(name, shown)}{listing}")
        out.append(name)
    return tuple(out)


def check_phases(ldb: LoadedDatabase, names: Iterable[str]) -> tuple[str, ...]:
    """Upper-case `names` and check each is a phase of the database.

    Raises
    ------
    DatabaseError
        An unknown phase (pycalphad itself would drop it silently); the message suggests close matches.
    """
    return _check_names(ldb, names, "phase", ldb.phases)


def check_elements(ldb: LoadedDatabase, names: Iterable[str]) -> tuple[str, ...]:
    """Upper-case `names` and check each is an element of the database (DatabaseError otherwise)."""
    real = [e for e in ldb.elements if e not in ("VA", "/-")]
    return _check_names(ldb, names, "element", ldb.elements, shown=real)


def check_species(ldb: LoadedDatabase, names: Iterable[str]) -> tuple[str, ...]:
    """Upper-case `names` and check each is a species of the database (DatabaseError otherwise)."""
    known = sorted(str(s.name).upper() for s in ldb.db.species)
    return _check_names(ldb, names, "species", known, listed=False)


def components_for(ldb: LoadedDatabase, elements: Iterable[str]) -> list[str]:
    """pycalphad components for `elements`: checked, upper case, sorted, plus VA whenever any phase has VA.

    pycalphad silently drops every phase with a vacancy sublattice when VA is not among the components.
    """
    comps = set(check_elements(ldb, elements))
    has_va = any(
        any(sp.name == "VA" for subl in ph.constituents for sp in subl) for ph in ldb.db.phases.values()
    )
    if has_va:
        comps.add("VA")
    return sorted(comps)


def element_data(ldb: LoadedDatabase, names: Iterable[str]) -> dict[str, tuple[str, float, float, float]]:
    """Reference data of elements as ELEMENT lines give it: (reference phase, mass g/mol, H298-H0, S298)."""
    out = {}
    for el in check_elements(ldb, names):
        ref = ldb.db.refstates.get(el, {})
        out[el] = (
            str(ref.get("phase", "UNKNOWN")),
            float(ref.get("mass", 0.0)),
            float(ref.get("H298", 0.0)),
            float(ref.get("S298", 0.0)),
        )
    return out


# ------------------------------------------------------------------------------------------------------
# adding a model
def add_model(
    spec: str | os.PathLike | Database | LoadedDatabase,
    model: SublatticeModel,
    parameters: Mapping[str, str] | None = None,
) -> LoadedDatabase:
    """A copy of a database with the phase of `model` added (the original and the cache are untouched).

    Parameters
    ----------
    spec
        The database to extend (anything `load_database` takes, or a LoadedDatabase).
    model
        The interstitial phase; its elements must be in the database.
    parameters
        As in `SublatticeModel.tdb_block`; expressions may use the database's FUNCTIONs (``GHSERFE#``).

    Raises
    ------
    DatabaseError
        The phase exists already in the database, or an element of the model is missing.
    """
    base = spec if isinstance(spec, LoadedDatabase) else load_database(spec)
    if model.phase in base.db.phases:
        raise DatabaseError(
            f"phase {model.phase!r} exists already in database {base.name!r}; give another name"
        )
    elements = element_data(base, [*model.hosts, *model.interstitials])
    text = model.tdb_block(parameters, elements=elements)
    tmp, messages = _parse_text(text, f"model {model.phase}")
    db = _copy_database(base.db)
    phase = tmp.phases[model.phase]
    db.add_phase(model.phase, dict(phase.model_hints), list(phase.sublattices))
    db.add_phase_constituents(model.phase, [[sp.name for sp in subl] for subl in phase.constituents])
    from tinydb import where

    for p in tmp.search(where("phase_name") == model.phase):
        db.add_parameter(
            p["parameter_type"],
            p["phase_name"],
            [[sp.name for sp in subl] for subl in p["constituent_array"]],
            p["parameter_order"],
            p["parameter"],
            ref=p.get("reference"),
            diffusing_species=getattr(p.get("diffusing_species"), "name", None),
            force_insert=True,
        )
    return _make_loaded(db, f"{base.name}+{model.phase}", None, None, (*base.warnings, *messages))


def _copy_database(db: Any) -> Any:
    """A copy safe to extend: pycalphad 0.11.2's ``Database.__deepcopy__`` copies only the parameter table and
    shares ``phases``, ``symbols``, ``species`` ... with the original, so those containers are copied here."""
    new = copy.deepcopy(db)
    for key, value in list(vars(new).items()):
        if isinstance(value, dict | set | list):
            setattr(new, key, copy.copy(value))
    return new


def audit_database(spec: Any, *, structure_map: Mapping[str, str] | None = None) -> list[AuditRow]:
    """Site-ratio audit of every interstitial phase (re-exported from `solubility.databases.audit`)."""
    from solubility.databases.audit import audit_database as _audit

    return _audit(spec, structure_map=structure_map)
