"""TDB text read as commands: FUNCTIONs, a phase's PARAMETERs, temperature ranges, the functions an expression needs.

Pure text, no pycalphad: the models layer writes complete database files from these (`solubility.models.tdb_writer`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from solubility.errors import DatabaseError
from solubility.models.tdb_text import ALLOWED_FUNCTIONS, split_ranges

__all__ = [
    "BUILTIN_SYMBOLS",
    "Command",
    "function_closure",
    "functions_of",
    "parameters_of",
    "parse_ranges",
    "range_text",
    "referenced_names",
    "tdb_commands",
]

#: names an expression may use that no FUNCTION defines: temperature, pressure and pycalphad's gas constant
BUILTIN_SYMBOLS = frozenset({"T", "P", "R"})
_NAME_RE = re.compile(r"(?<![0-9.])\b([A-Z_][A-Z0-9_]*)#*", re.IGNORECASE)


@dataclass(frozen=True)
class Command:
    """One TDB command: its text (upper case, comments removed) and the lines it spans (1-based, inclusive)."""

    text: str
    first_line: int
    last_line: int

    @property
    def keyword(self) -> str:
        """The command keyword, expanded where it is an abbreviation of a common one (``PARA`` -> ``PARAMETER``)."""
        word = self.text.split(None, 1)[0] if self.text.split() else ""
        for full in ("PARAMETER", "FUNCTION", "PHASE", "CONSTITUENT", "ELEMENT", "TYPE_DEFINITION", "SPECIES"):
            if len(word) >= 3 and full.startswith(word.replace("-", "_")):
                return full
        return word


def tdb_commands(text: str) -> list[Command]:
    """Split TDB text like pycalphad's reader: ``$`` starts a comment, ``!`` ends a command."""
    out: list[Command] = []
    buf: list[str] = []
    start = 0
    for lineno, line in enumerate(text.upper().replace("\t", " ").split("\n"), start=1):
        parts = line.split("$", 1)[0].split("!")
        for j, part in enumerate(parts):
            if not buf and part.strip():
                start = lineno
            if part.strip():
                buf.append(part.strip())
            if j < len(parts) - 1:
                if buf:
                    out.append(Command(" ".join(buf), start, lineno))
                buf = []
    return out


def functions_of(text: str) -> dict[str, str]:
    """``{NAME: range text}`` of every FUNCTION command of a TDB text."""
    out = {}
    for cmd in tdb_commands(text):
        if cmd.keyword == "FUNCTION":
            parts = cmd.text.split(None, 2)
            if len(parts) == 3:
                out[parts[1]] = parts[2]
    return out


_PARAM_RE = re.compile(r"^\S+\s+([A-Z]+)\s*\(\s*([A-Z0-9_#]+)\s*,\s*([^;)]*?)\s*(?:;\s*(\d+))?\s*\)\s*(.*)$")


def parameters_of(text: str, phase: str) -> dict[str, str]:
    """``{"G(PHASE,FE:C;0)": range text}`` of the PARAMETER commands of one phase (reference words kept)."""
    out = {}
    for cmd in tdb_commands(text):
        if cmd.keyword != "PARAMETER":
            continue
        m = _PARAM_RE.match(cmd.text)
        if m and m.group(2) == phase.upper():
            array = ":".join(",".join(s.strip() for s in sub.split(",")) for sub in m.group(3).split(":"))
            out[f"{m.group(1)}({m.group(2)},{array};{int(m.group(4) or 0)})"] = m.group(5).strip()
    return out


def referenced_names(expr: str) -> set[str]:
    """Symbol names an expression uses (``GHSERFE#`` -> ``GHSERFE``), without the functions LN, LOG, EXP."""
    names = {m.group(1).upper() for m in _NAME_RE.finditer(expr)}
    return {n for n in names if n not in ALLOWED_FUNCTIONS and not re.fullmatch(r"[ED]\d*", n)}


def function_closure(names: set[str], functions: dict[str, str]) -> list[str]:
    """Every FUNCTION `names` need, directly or through other functions, in a stable order.

    Raises
    ------
    DatabaseError
        A name is neither a FUNCTION of `functions` nor T, P or R (pycalphad would silently take it as zero).
    """
    seen: list[str] = []
    todo = sorted(names - BUILTIN_SYMBOLS)
    while todo:
        name = todo.pop(0)
        if name in seen:
            continue
        if name not in functions:
            raise DatabaseError(f"symbol {name} is not a FUNCTION of the database (and not T, P or R)")
        seen.append(name)
        for expr in split_ranges(functions[name]):
            todo += sorted(referenced_names(expr) - BUILTIN_SYMBOLS - set(seen))
    return seen


def parse_ranges(text: str) -> list[tuple[float, str, float]]:
    """Pieces ``(T_low, expression, T_high)`` of a TDB range text ``T0 e0; T1 Y e1; T2 N ref``.

    Raises
    ------
    DatabaseError
        The text is not a sequence of limits and expressions.
    """
    pieces = [p.strip() for p in text.split(";")]
    if len(pieces) < 2:
        raise DatabaseError(f"range text {text[:60]!r} has no upper limit ('298.15 expr; 6000 N')")
    out = []
    words = pieces[0].split(None, 1)
    try:
        low = float(words[0].replace("D", "E"))
    except (ValueError, IndexError):
        raise DatabaseError(f"range text {text[:60]!r} does not start with a temperature") from None
    expr = words[1] if len(words) > 1 else "0"
    for piece in pieces[1:]:
        words = piece.split()
        try:
            high = float(words[0].replace("D", "E"))
        except (ValueError, IndexError):
            raise DatabaseError(f"range text {text[:60]!r}: {piece[:30]!r} has no temperature limit") from None
        out.append((low, expr, high))
        if len(words) < 2 or words[1].upper() != "Y":
            break
        low, expr = high, " ".join(words[2:]) or "0"
    return out


def range_text(pieces: list[tuple[float, str, float]]) -> str:
    """The TDB text of range pieces from `parse_ranges` (contiguous), ending with ``N``."""
    parts = [f"{pieces[0][0]:.12g} {pieces[0][1]}"]
    for i, (_, _expr, high) in enumerate(pieces):
        parts.append(f"{high:.12g} N" if i == len(pieces) - 1 else f"{high:.12g} Y {pieces[i + 1][1]}")
    return "; ".join(parts)
