"""TDB text in and out: the header, reference list and parameter references of a source file, and the TDB text
of a pycalphad Database (`write_tdb`), each parameter keeping its reference code.

Used by `solubility.databases.reduce` (a database cut down to some elements, written with its source's header and
references).
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from pycalphad import Database

__all__ = [
    "tdb_database_info",
    "tdb_header",
    "tdb_parameter_references",
    "tdb_references",
    "tdb_text",
    "with_references",
    "write_tdb",
]


def _parameter_label(p: Mapping[str, Any]) -> str:
    cons = ":".join(",".join(sorted(str(s.name) for s in subl)) for subl in p["constituent_array"])
    return f"{p['parameter_type']}({p['phase_name']},{cons};{p['parameter_order']})"


# ------------------------------------------------------------------------------------------------------
# reduction
# ------------------------------------------------------------------------------------------------------
# the source text: header and reference list
def tdb_header(text: str) -> str:
    """The comment block at the top of TDB text: every line up to the first command (blank lines kept)."""
    lines = []
    for line in text.splitlines():
        stripped = line.strip()
        if stripped and not stripped.startswith("$"):
            break
        lines.append(line.rstrip())
    while lines and not lines[-1].strip():
        lines.pop()
    return "\n".join(lines)


def tdb_database_info(text: str) -> str:
    """The DATABASE_INFO command of TDB text (the list of assessed systems), or ``""``."""
    m = re.search(r"^\s*DATABASE_INFO\b.*?!", text, flags=re.S | re.M | re.I)
    return m.group(0).strip() if m else ""


#: an entry starts at the beginning of a line (at most 3 spaces in) with a code: year digits, then letters
_REF_START = re.compile(r"^[ \t]{0,3}(\d\d[A-Za-z][A-Za-z0-9_-]*)[ \t]+", re.M)


def tdb_references(text: str) -> dict[str, str]:
    """The entries of the LIST_OF_REFERENCES command of TDB text: code -> text (one line, spaces collapsed).

    pycalphad's reader skips this command, so it is read here from the text. An entry starts on a line with a
    code (two digits of the year, then letters: ``91DIN 'Dinsdale, ...``) and runs to the next entry; its outer
    quotes are removed (quotes inside are kept). A heading line ``NUMBER SOURCE`` is skipped.
    """
    m = re.search(r"^\s*LIST_OF_REFERENCES\b(.*?)^\s*!", text, flags=re.S | re.M | re.I)
    if m is None:
        return {}
    block = m.group(1)
    starts = list(_REF_START.finditer(block))
    out = {}
    for i, st in enumerate(starts):
        end = starts[i + 1].start() if i + 1 < len(starts) else len(block)
        body = " ".join(block[st.end() : end].split())
        body = body[1:] if body.startswith("'") else body
        out[st.group(1).upper()] = body[:-1] if body.endswith("'") else body
    return out


_PARAM_CMD = re.compile(r"^\s*PARAMETER\s+(\w+)\s*\(\s*([^,&\s]+)(?:&[^,]*)?,([^;]*);\s*(\d+)\s*\)(.*?)!",
                        re.S | re.M | re.I)
_PARAM_REF = re.compile(r"[NY]\s*([A-Za-z0-9_-]*)\s*$")


def tdb_parameter_references(text: str) -> dict[str, str]:
    """Reference code of each PARAMETER of TDB text (pycalphad's reader drops them), by parameter label.

    Returns
    -------
    dict
        ``G(PHASE,A:B,C;0)`` (upper case, species sorted in each sublattice) -> code, e.g. ``91DIN``.
    """
    out = {}
    for ptype, phase, cons, order, rest in _PARAM_CMD.findall(_strip_comments(text)):
        m = _PARAM_REF.search(rest.strip())
        if not m or not m.group(1):
            continue
        subls = ":".join(",".join(sorted(s.strip().upper() for s in sub.split(","))) for sub in cons.split(":"))
        out[f"{ptype.upper()}({phase.upper()},{subls};{int(order)})"] = m.group(1).upper()
    return out


def _strip_comments(text: str) -> str:
    return "\n".join(line.split("$", 1)[0] for line in text.splitlines())


def with_references(db: Database, codes: Mapping[str, str]) -> Database:
    """`db`'s parameters given the reference codes `codes` (from `tdb_parameter_references`), in place."""
    docs = [dict(d) for d in db._parameters.all()]
    for doc in docs:
        code = codes.get(_parameter_label(doc).upper())
        if code and not doc.get("reference"):
            doc["reference"] = code
    db._parameters.truncate()
    db._parameters.insert_multiple(docs)
    return db


# ------------------------------------------------------------------------------------------------------
# writing
def write_tdb(
    db: Database,
    path: str | os.PathLike,
    *,
    header: str = "",
    references: Mapping[str, str] | None = None,
    overwrite: bool = False,
) -> Path:
    """Write `db` as TDB text, atomically, keeping each parameter's reference code.

    Parameters
    ----------
    db
        A pycalphad Database (e.g. from `reduce_database`).
    path
        Output file.
    header
        Comment text put first (lines not starting with ``$`` get one); the licence and notes of the source.
    references
        Reference code -> text; the entries whose code a written parameter uses are written as a
        LIST_OF_REFERENCES (all of them if None is not given and no parameter carries a code).
    overwrite
        Replace an existing file.

    Returns
    -------
    Path
        The written file.
    """
    from solubility._io import atomic_write_text, check_output_path

    out = check_output_path(path, overwrite=overwrite)
    return atomic_write_text(out, tdb_text(db, header=header, references=references))


def tdb_text(db: Database, *, header: str = "", references: Mapping[str, str] | None = None) -> str:
    """The TDB text `write_tdb` writes (see there)."""
    import warnings

    body_db = _without_parameters(db)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # long FUNCTION names: kept, pycalphad reads them
        body = body_db.to_string(fmt="tdb", if_incompatible="ignore")
    body = _POSITIVE_POWER.sub(r"**\1", _cut_generated_header(body))
    lines = [_comment(header)] if header.strip() else []
    lines.append(body.rstrip() + "\n")
    used: set[str] = set()
    for phase in sorted(db.phases):
        params = sorted((p for p in db._parameters.all() if p["phase_name"] == phase
                         and not _symmetry_added(db, p)), key=_parameter_sort_key)
        if not params:
            continue
        lines.append(f"\n$ {phase}\n")
        for p in params:
            ref = str(p.get("reference") or "").strip().upper()
            if ref:
                used.add(ref)
            lines.append(_reflow(_parameter_line(p, ref)))
    if references:
        entries = {k.upper(): v for k, v in references.items()}
        listed = sorted(c for c in used if c in entries) if used else sorted(entries)
        if listed:
            lines.append("\nLIST_OF_REFERENCES\nNUMBER  SOURCE\n")
            for code in listed:
                lines.append(_reference_entry(code, entries[code]))
            lines.append("!\n")
    return "".join(lines)


def _symmetry_added(db: Any, p: Mapping[str, Any]) -> bool:
    """A parameter pycalphad's reader generated from a symmetry option (``B``/``F`` in the PHASE command);
    the reader generates it again, so it is not written (as in pycalphad's own writer)."""
    if not p.get("_generated_by_symmetry_option", False):
        return False
    hints = db.phases[p["phase_name"]].model_hints
    return any(hints.get(k) for k in ("symmetry_FCC_4SL", "symmetry_BCC_4SL"))


def _without_parameters(db: Any) -> Any:
    from pycalphad import Database

    out = Database()
    for key in ("elements", "species", "phases", "refstates", "_structure_dict", "symbols", "references"):
        setattr(out, key, getattr(db, key))
    return out


def _cut_generated_header(body: str) -> str:
    """Drop the block pycalphad's writer puts first (date, components, phases, the user's login name)."""
    lines = body.splitlines(keepends=True)
    if lines and lines[0].startswith("$$$"):
        for i in range(1, len(lines)):
            if lines[i].startswith("$$$"):
                return "".join(lines[i + 1 :]).lstrip("\n")
    return body


def _comment(text: str) -> str:
    return "".join((ln if ln.startswith("$") else f"$ {ln}").rstrip() + "\n" for ln in text.splitlines()) + "\n"


#: a binary + or - (not the sign of an exponent as in 1.5E-3, not after an operator or parenthesis)
_BINARY_SIGN = re.compile(r"(?<=[\w#)])(?<![0-9][Ee])(?<![0-9.][0-9][Ee])([+-])")


#: pycalphad's printer writes T**(3); T**3 is the same and parses faster (fewer nesting levels)
_POSITIVE_POWER = re.compile(r"\*\*\((\d+)\)")


def _reflow(line: str, width: int = 78) -> str:
    """Break a command over lines of at most `width` characters, at spaces or before binary + and -.

    pycalphad's reader joins the lines of a command with a space, which TDB expressions allow between terms.
    """
    words = _BINARY_SIGN.sub(r" \1", line.rstrip("\n")).split()
    out, cur = [], ""
    for w in words:
        if cur and len(cur) + 1 + len(w) > width:
            out.append(cur)
            cur = "  " + w
        else:
            cur = f"{cur} {w}" if cur else w
    out.append(cur)
    return "\n".join(out) + "\n"


def _parameter_sort_key(p: Mapping[str, Any]) -> tuple:
    return (
        str(p["parameter_type"]),
        sum(len(s) for s in p["constituent_array"]),
        _parameter_label(p),
        int(p["parameter_order"]),
    )


def _parameter_line(p: Mapping[str, Any], ref: str) -> str:
    from pycalphad import variables as v
    from pycalphad.io.tdb import TCPrinter
    from symengine import And, Piecewise

    expr = p["parameter"]
    if not isinstance(expr, Piecewise):
        expr = Piecewise((expr, And(v.T >= 1, v.T < 10000)))
    text = _POSITIVE_POWER.sub(r"**\1", TCPrinter(if_incompatible="ignore").doprint(expr).upper())
    if ";" not in text:
        text += "; N"
    diff = p.get("diffusing_species")
    ds = f"&{diff.name}" if diff is not None and getattr(diff, "name", None) else ""
    cons = ":".join(",".join(sorted(s.name.upper() for s in subl)) for subl in p["constituent_array"])
    tail = f" {ref}" if ref else ""
    return f"PARAMETER {p['parameter_type'].upper()}({p['phase_name'].upper()}{ds},{cons};{p['parameter_order']}) " \
           f"{text}{tail} !\n"


def _reference_entry(code: str, text: str) -> str:
    import textwrap

    body = text.replace("'", "`")  # the entry is quoted with '
    wrapped = textwrap.wrap(f"'{body}'", width=68) or ["''"]
    first = f"{code:<8}{wrapped[0]}"
    return "\n".join([first, *(" " * 8 + w for w in wrapped[1:])]) + "\n"


