"""Guards on TDB text before it reaches pycalphad's parser: pure text, no pycalphad.

Why: pycalphad 0.11.2 checks an expression against an AST whitelist that admits calls of any name, then hands
it to SymEngine's own parser (not Python's ``eval``); constant subexpressions are evaluated exactly (``9**9**9``
took 11 s there), and deep nesting recurses. So every FUNCTION and PARAMETER expression is read here first and
refused when it is too long, too deep, holds a literal or constant power too large, calls anything but LN, LOG
or EXP, or names anything with a double underscore. `solubility.databases.reader` applies these guards, and
`solubility.databases.pycalphad_io` applies `check_expression` again to every string pycalphad's reader would
evaluate.
"""

from __future__ import annotations

import re

from solubility.errors import DatabaseError
from solubility.models.tdb_text import (
    ALLOWED_FUNCTIONS,
    MAX_CONSTANT_POWER,
    MAX_CONSTANT_VALUE,
    MAX_EXPRESSION_CHARS,
    MAX_LITERAL_DIGITS,
    MAX_NESTING,
    check_expression,
    split_ranges,
)

__all__ = [
    "ALLOWED_FUNCTIONS",
    "MAX_COMMAND_CHARS",
    "MAX_CONSTANT_POWER",
    "MAX_CONSTANT_VALUE",
    "MAX_EXPRESSION_CHARS",
    "MAX_LITERAL_DIGITS",
    "MAX_NESTING",
    "check_expression",
    "guard_tdb_text",
    "split_ranges",
]

#: longest single command (text between two '!'), characters
MAX_COMMAND_CHARS = 200_000


def _commands(text: str) -> list[tuple[int, str]]:
    """Split TDB text like pycalphad's reader: ``$`` starts a comment, ``!`` ends a command.

    Returns (line number of the command's start, command text) pairs, empty commands dropped.
    """
    out: list[tuple[int, str]] = []
    buf: list[str] = []
    start = 0
    for lineno, line in enumerate(text.upper().replace("\t", " ").split("\n"), start=1):
        body = line.split("$", 1)[0]
        parts = body.split("!")
        for j, part in enumerate(parts):
            if not buf and part.strip():
                start = lineno
            if part.strip():
                buf.append(part)
            if j < len(parts) - 1:
                if buf:
                    out.append((start, " ".join(buf)))
                buf = []
    if buf and " ".join(buf).strip():
        out.append((start, " ".join(buf)))
    return out


_KEYWORD_END = re.compile(r"[ ():,]")
_SYMBOL_NAME = re.compile(r"^\s*[A-Z0-9_:()/-]+")


def _command_expressions(command: str) -> list[str]:
    """Expressions of a FUNCTION or PARAMETER command (pycalphad accepts any prefix of the keyword)."""
    text = command.lstrip()
    m = _KEYWORD_END.search(text)
    keyword, rest = (text[: m.start()], text[m.start() :]) if m else (text, "")
    keyword = keyword.replace("-", "_")
    if not keyword or "_" in keyword:
        return []
    exprs: list[str] = []
    if "FUNCTION".startswith(keyword):
        name = _SYMBOL_NAME.match(rest)
        exprs += split_ranges(rest[name.end() :] if name else rest)
    if "PARAMETER".startswith(keyword):
        comma = rest.find(",")
        close = rest.find(")", comma) if comma >= 0 else -1
        if close >= 0:  # without it pycalphad cannot parse a PARAMETER (and evaluates nothing)
            exprs += split_ranges(rest[close + 1 :])
    return exprs


def guard_tdb_text(text: str, *, source: str = "database") -> None:
    """Check the text of a TDB file against the guards before it reaches pycalphad's parser.

    Raises
    ------
    DatabaseError
        ``"{source}, line N: ..."`` for the first command that breaks a rule (`check_expression`,
        `MAX_COMMAND_CHARS`).
    """
    for lineno, command in _commands(text):
        try:
            if len(command) > MAX_COMMAND_CHARS:
                raise DatabaseError(f"command of {len(command)} characters; at most {MAX_COMMAND_CHARS}")
            for expr in _command_expressions(command):
                check_expression(expr)
        except DatabaseError as exc:
            raise DatabaseError(f"{source}, line {lineno}: {exc}") from None
