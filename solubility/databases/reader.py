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

After the parse, faults pycalphad reads without a word are looked for (`solubility.databases.pycalphad_io`):
a PHASE declared twice and a PARAMETER given twice are refused with their line, a FUNCTION that refers to itself
(directly or through others) is refused, and FUNCTIONs referenced but never defined (pycalphad takes them as
zero) are recorded in `LoadedDatabase.undefined_functions` and warned about where a chosen phase uses them.
Text written on other systems reads as pycalphad reads a file: CRLF and CR line ends, a UTF-8 byte-order mark.

Parsed Databases are cached in-process per (resolved path, sha256), and on disk across runs by the file's
sha256 (`solubility.databases.parse_cache`): parsing a TDB costs seconds.
pycalphad is imported inside the functions that need it. The bundled databases are listed by
`solubility.databases.bundled`; `solubility.databases.extend.add_model` adds a model's phase to a copy.
"""

from __future__ import annotations

import difflib
import hashlib
import os
import threading
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from solubility.databases.bundled import bundled_databases, bundled_path
from solubility.databases.guard import (
    MAX_COMMAND_CHARS,
    MAX_EXPRESSION_CHARS,
    MAX_NESTING,
    check_expression,
    guard_tdb_text,
    split_ranges,
)
from solubility.databases.pycalphad_io import function_faults, parse_tdb
from solubility.errors import DatabaseError, DatabaseNotFoundError, InputError

if TYPE_CHECKING:  # pragma: no cover
    from pycalphad import Database

__all__ = [
    "MAX_COMMAND_CHARS",
    "MAX_EXPRESSION_CHARS",
    "MAX_FILE_BYTES",
    "MAX_NESTING",
    "LoadedDatabase",
    "check_elements",
    "check_expression",
    "check_phases",
    "check_species",
    "components_for",
    "database_path",
    "element_data",
    "guard_tdb_text",
    "load_database",
    "split_ranges",
]

#: largest database file read, bytes (the largest open TDB files are a few MB; pycalphad parses ~0.1 MB/s)
MAX_FILE_BYTES = 16 * 1024 * 1024
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
    undefined_functions
        Names used in expressions but never defined as FUNCTIONs (pycalphad takes them as zero), sorted; callers
        put them in a result's attrs.
    """

    db: Database
    name: str
    path: Path | None
    sha256: str | None
    elements: tuple[str, ...]
    phases: tuple[str, ...]
    warnings: tuple[str, ...] = field(default=(), compare=False)
    undefined_functions: tuple[str, ...] = field(default=(), compare=False)

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
        text = data.decode("utf-8-sig")  # a byte-order mark, as Windows editors write, is dropped
    except UnicodeDecodeError:
        text = data.decode("latin-1")
    # line ends as Python's text mode reads them (pycalphad's Database(path) opens files so): CRLF and CR -> LF
    text = text.replace("\r\n", "\n").replace("\r", "\n")
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
    bundled = bundled_path(str(text))
    if bundled is not None:
        return bundled.resolve(), str(text).strip().lower()
    names = [e["name"] for e in bundled_databases()]
    close = difflib.get_close_matches(str(text).lower(), names, n=3)
    hint = f"; did you mean {', '.join(close)}?" if close else ""
    raise DatabaseNotFoundError(
        f"database {str(text)[:200]!r} is neither an existing file nor a bundled database "
        f"({', '.join(names)}){hint}"
    )


def database_path(spec: str | os.PathLike) -> Path | None:
    """The file `load_database(spec)` would read (a path or a bundled name), or None where there is none.

    For output checks (`solubility._io.check_outputs`): an output must never replace a command's database.
    """
    try:
        return _resolve(spec)[0]
    except DatabaseError:
        return None


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
    if isinstance(spec, LoadedDatabase):  # what add_model returns is accepted wherever a database is
        return spec
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
    undefined = _check_functions(db, name)
    return LoadedDatabase(
        db=db,
        name=name,
        path=path,
        sha256=digest,
        elements=tuple(sorted(str(e).upper() for e in db.elements)),
        phases=tuple(sorted(db.phases)),
        warnings=tuple(messages),
        undefined_functions=tuple(undefined),
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
    return parse_tdb(text, label)


def _check_functions(db: Any, label: str) -> tuple[str, ...]:
    """Refuse a FUNCTION cycle; return the FUNCTIONs referenced but never defined (pycalphad takes them as zero).

    Those are only recorded here: a large database often has a few in phases a calculation never uses, so the
    warning (`solubility.errors.DatabaseWarning`) is given where a chosen phase uses one (`solubility.thermo.checks`).
    """
    undefined, cycle = function_faults(db)
    if cycle is not None:
        chain = " -> ".join(cycle)
        what = "refers to itself" if len(cycle) == 2 else f"refers to itself through {chain}"
        raise DatabaseError(f"{label}: FUNCTION {cycle[0]} {what}; pycalphad would take it as zero")
    return tuple(undefined)


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
