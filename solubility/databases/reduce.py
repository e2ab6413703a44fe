"""Reduce a thermodynamic database to a set of elements, and write a Database as TDB text.

`reduce_database` keeps what the chosen elements (plus VA and the electron ``/-``) can form: the elements and
species, the phases whose every sublattice keeps at least one constituent (each sublattice cut to the kept
species), the parameters whose constituents are all kept, the FUNCTIONs those parameters reference
(transitively), the element reference data, and the order-disorder links (``ordered_phase`` /
``disordered_phase`` model hints, from ``AMEND_PHASE_DESCRIPTION ... DIS_PART``) kept consistent. A model built
from the reduced database for any subset of the kept elements equals the one built from the full database.

`write_tdb` writes a Database as TDB text. pycalphad 0.11.2's own writer (``Database.to_string(fmt='tdb')``)
loses, as checked here: every comment and the file's header (licence, notes), the reference code of each
parameter (its writer has a ``TODO: Handle references``), the LIST_OF_REFERENCES (its reader skips it), and it
puts the user's login name and the date in a generated header. It keeps the order-disorder links (written as
``DISORDERED_PART``), the magnetic type definitions and the phase options. So the elements, species, FUNCTIONs,
type definitions and phases are taken from pycalphad's writer (its generated header cut off), and the
parameters are written here with their reference codes; a header and a reference list, read from the source
text with `tdb_header` and `tdb_references`, can be given.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from solubility.databases.tdb_format import (
    _comment,
    _parameter_label,
    tdb_database_info,
    tdb_header,
    tdb_parameter_references,
    tdb_references,
    tdb_text,
    with_references,
    write_tdb,
)
from solubility.errors import DatabaseError, InputError

if TYPE_CHECKING:  # pragma: no cover
    from pycalphad import Database

__all__ = [
    "reduce_database",
    "reduce_tdb_file",
    "referenced_functions",
    "tdb_database_info",
    "tdb_header",
    "tdb_parameter_references",
    "tdb_references",
    "tdb_text",
    "undefined_functions",
    "with_references",
    "write_tdb",
]

#: species every reduction keeps when the database declares them (vacancy, electron)
_ALWAYS = ("VA", "/-")
#: names in expressions that are state variables, not FUNCTIONs
_STATE_VARIABLES = frozenset({"T", "P", "N"})


# ------------------------------------------------------------------------------------------------------
# symbols
def _names(expr: Any) -> set[str]:
    return {str(getattr(s, "name", s)) for s in getattr(expr, "free_symbols", ())}


def referenced_functions(db: Database, roots: Iterable[Any]) -> set[str]:
    """Names of the FUNCTIONs defined in `db` that the expressions `roots` use, directly or through others."""
    todo = set().union(*(_names(e) for e in roots)) if roots else set()
    seen: set[str] = set()
    while todo:
        name = todo.pop()
        if name in seen or name not in db.symbols:
            continue
        seen.add(name)
        todo |= _names(db.symbols[name]) - seen
    return seen


def undefined_functions(db: Database) -> dict[str, list[str]]:
    """FUNCTION names used in `db` but never defined (pycalphad takes them as zero), with their users.

    Returns
    -------
    dict
        Name -> sorted list of the parameters (``G(PHASE,A:B;0)``) and FUNCTIONs that use it.
    """
    out: dict[str, set[str]] = {}

    def note(expr: Any, user: str) -> None:
        for name in _names(expr) - set(db.symbols) - _STATE_VARIABLES:
            out.setdefault(name, set()).add(user)

    for name, expr in db.symbols.items():
        note(expr, f"FUNCTION {name}")
    for p in db._parameters.all():
        note(p["parameter"], _parameter_label(p))
    return {k: sorted(v) for k, v in sorted(out.items())}


def reduce_database(database: Any, elements: Iterable[str]) -> Database:
    """A new pycalphad Database holding only what `elements` (plus VA and ``/-``) can form.

    Parameters
    ----------
    database
        A pycalphad Database, a `LoadedDatabase`, a TDB path or a bundled name. Read from a file, the
        parameters get the reference codes the file gives them (pycalphad's reader drops them).
    elements
        Element names (any case); each must be in the database.

    Returns
    -------
    pycalphad.Database
        A new object (the input is not modified). Phases lose the constituents that cannot be formed and are
        dropped when a sublattice would be left empty; an ordered phase kept keeps its disordered part; a
        disordered phase whose ordered phases are all gone loses its order-disorder hints.

    Raises
    ------
    InputError
        No element given, or an element not in the database.
    """
    from pycalphad import Database
    from pycalphad.io.database import Phase

    db, source = _as_database(database)
    wanted = {str(e).strip().upper() for e in elements}
    if not wanted:
        raise InputError("no element given to reduce the database to; give at least one element")
    missing = sorted(wanted - {e.upper() for e in db.elements})
    if missing:
        raise InputError(
            f"element {missing[0]!r} is not in the database; its elements: "
            f"{', '.join(sorted(e for e in db.elements if e not in _ALWAYS))}"
        )
    keep_el = wanted | ({e.upper() for e in db.elements} & set(_ALWAYS))
    keep_sp = {sp for sp in db.species if {str(k).upper() for k in sp.constituents} <= keep_el}
    keep_names = {sp.name for sp in keep_sp}

    phases: dict[str, Any] = {}
    for name, ph in db.phases.items():
        cons = tuple(frozenset(sp for sp in subl if sp.name in keep_names) for subl in ph.constituents)
        if any(len(s) == 0 for s in cons):
            continue
        new = Phase()
        new.name, new.constituents = ph.name, cons
        new.sublattices, new.model_hints = ph.sublattices, dict(ph.model_hints)
        phases[name] = new
    _link_order_disorder(db, phases)

    params = []
    for p in db._parameters.all():
        if p["phase_name"] not in phases:
            continue
        if not all(sp.name in keep_names or sp.name == "*" for subl in p["constituent_array"] for sp in subl):
            continue
        diff = p.get("diffusing_species")
        if diff is not None and getattr(diff, "name", "") and diff.name not in keep_names:
            continue
        params.append(dict(p))

    out = Database()
    out.elements = {e for e in db.elements if e.upper() in keep_el}
    out.species = set(keep_sp)
    out.phases = phases
    out.refstates = {k: dict(v) for k, v in db.refstates.items() if k.upper() in keep_el}
    out._structure_dict = {k: v for k, v in db._structure_dict.items() if k in phases}
    kept_fn = referenced_functions(db, [p["parameter"] for p in params])
    out.symbols = {k: v for k, v in db.symbols.items() if k in kept_fn}
    out.references = dict(getattr(db, "references", {}) or {})
    out._parameters.insert_multiple(params)
    if source is not None:  # pycalphad's reader drops the reference codes: take them from the file
        with contextlib.suppress(OSError):
            with_references(out, tdb_parameter_references(source.read_bytes().decode("utf-8", errors="replace")))
    return out


def _link_order_disorder(db: Any, phases: dict[str, Any]) -> None:
    """Keep ordered phases with their disordered parts; drop links to phases that are gone."""
    for name in list(phases):
        hints = phases[name].model_hints
        ordered, disordered = hints.get("ordered_phase"), hints.get("disordered_phase")
        # the disordered part cannot be formed: the ordered phase cannot be built either
        if ordered == name and disordered is not None and disordered not in phases and disordered in db.phases:
            del phases[name]
    for name, ph in phases.items():
        hints = ph.model_hints
        if hints.get("disordered_phase") == name and hints.get("ordered_phase") not in phases:
            alive = sorted(o for o, q in phases.items()
                           if q.model_hints.get("ordered_phase") == o and q.model_hints.get("disordered_phase") == name)
            if alive:
                hints["ordered_phase"] = alive[-1]
            else:
                hints.pop("ordered_phase", None)
                hints.pop("disordered_phase", None)


def _as_database(database: Any) -> tuple[Any, Path | None]:
    """The pycalphad Database and the file it was read from (None for an in-memory Database)."""
    from pycalphad import Database

    if isinstance(database, Database):
        return database, None
    if isinstance(database, str | os.PathLike):
        from solubility.databases.reader import load_database

        database = load_database(database)
    db = getattr(database, "db", None)  # a LoadedDatabase
    if isinstance(db, Database):
        return db, getattr(database, "path", None)
    raise InputError(f"database {database!r} is not a path, a bundled name or a pycalphad Database")


# ------------------------------------------------------------------------------------------------------
# the everyday chore: reduce a file, keep its header and references
def reduce_tdb_file(
    source: str | os.PathLike,
    elements: Iterable[str],
    path: str | os.PathLike,
    *,
    note: str = "",
    replace: Mapping[str, str] | None = None,
    overwrite: bool = False,
) -> Path:
    """Reduce the TDB file `source` to `elements` and write it to `path` with its header and references.

    Parameters
    ----------
    source
        A TDB file (read through `load_database`: guarded, cached).
    elements
        The elements to keep (VA and ``/-`` are added).
    path
        Output file.
    note
        Comment lines added after the source's header (what was done).
    replace
        Text replacements applied to the header and the reference texts (redactions), in order.
    overwrite
        Replace an existing file.
    """
    from solubility.databases.reader import load_database

    loaded = load_database(source)
    if loaded.path is None:  # pragma: no cover - load_database of a path always has one
        raise DatabaseError(f"database {source!r} has no file to read a header from")
    text = loaded.path.read_bytes().decode("utf-8", errors="replace")
    reduced = reduce_database(loaded, elements)  # reference codes taken from the file
    header, refs = tdb_header(text), tdb_references(text)
    info = tdb_database_info(text)
    if info:  # kept as comment lines: the source's list of assessed systems and their authors
        title = "$ The source's DATABASE_INFO (its list of assessed systems, all elements):"
        header = f"{header}\n$\n{title}\n{_comment(info).rstrip()}"
    for old, new in (replace or {}).items():
        header = header.replace(old, new)
        refs = {k: v.replace(old, new) for k, v in refs.items()}
    if note.strip():
        header = f"{header}\n$\n{_comment(note).rstrip()}"
    return write_tdb(reduced, path, header=header, references=refs, overwrite=overwrite)
