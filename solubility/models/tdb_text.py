"""Pure-text checks on TDB expressions: the whitelist grammar every FUNCTION and PARAMETER expression must pass.

Why: pycalphad 0.11.2 checks an expression against an AST whitelist that admits calls of any name, then hands
it to SymEngine's own parser (not Python's ``eval``); constant subexpressions are evaluated exactly (``9**9**9``
took 11 s there), and deep nesting recurses. So every expression is read here first and refused when it is too
long, too deep, holds a literal or constant power too large, calls anything but LN, LOG or EXP, or names anything
with a double underscore. The models layer checks the expressions it writes with these; the database guards
(`solubility.databases.guard`) apply them to whole files. No pycalphad.
"""

from __future__ import annotations

import math
import re

from solubility.errors import DatabaseError

__all__ = [
    "ALLOWED_FUNCTIONS",
    "MAX_CONSTANT_POWER",
    "MAX_CONSTANT_VALUE",
    "MAX_EXPRESSION_CHARS",
    "MAX_LITERAL_DIGITS",
    "MAX_NESTING",
    "check_expression",
    "evaluate_constant",
    "split_ranges",
]

#: longest single expression (one temperature range of a FUNCTION or PARAMETER), characters
MAX_EXPRESSION_CHARS = 20_000
#: deepest nesting of parentheses, unary signs and powers in one expression
MAX_NESTING = 50
#: most digits in one numeric literal (mantissa)
MAX_LITERAL_DIGITS = 40
#: largest |exponent| of a constant power, and largest |value| of any constant subexpression
MAX_CONSTANT_POWER = 100.0
MAX_CONSTANT_VALUE = 1e300
#: functions an expression may call (pycalphad maps them to ln, log, exp)
ALLOWED_FUNCTIONS = frozenset({"LN", "LOG", "EXP"})


_TOKEN_RE = re.compile(
    r"\s*(?:(?P<num>(?:\d+\.?\d*|\.\d+)(?:[ED][+-]?\d+)?)|(?P<name>[A-Z_][A-Z0-9_]*#*)|(?P<op>\*\*|[-+*/^()]))"
)


def _tokens(expr: str) -> list[tuple[str, str]]:
    text = expr.upper()
    out: list[tuple[str, str]] = []
    pos = 0
    end = len(text.rstrip())
    while pos < end:
        m = _TOKEN_RE.match(text, pos)
        if m is None or m.end() == pos:
            bad = text[pos:].lstrip()[:1]
            raise DatabaseError(
                f"character {bad!r} not accepted in an expression (numbers, names, + - * / ** ^ ( ))"
            )
        kind = m.lastgroup or "op"
        out.append((kind, m.group(kind)))
        pos = m.end()
    return out


class _ExprParser:
    """Recursive-descent check of one expression; folds constant subexpressions in floating point."""

    def __init__(self, tokens: list[tuple[str, str]]) -> None:
        self.toks = tokens
        self.i = 0
        self.depth = 0

    def peek(self) -> tuple[str, str] | None:
        return self.toks[self.i] if self.i < len(self.toks) else None

    def take(self) -> tuple[str, str]:
        tok = self.peek()
        if tok is None:
            raise DatabaseError("expression ends too early")
        self.i += 1
        return tok

    def nest(self) -> None:
        self.depth += 1
        if self.depth > MAX_NESTING:
            raise DatabaseError(f"expression nested deeper than {MAX_NESTING} levels")

    def parse(self) -> float | None:
        if not self.toks:
            raise DatabaseError("empty expression")
        value = self.expr()
        if self.peek() is not None:
            raise DatabaseError(f"unexpected {self.peek()[1]!r} in expression")  # type: ignore[index]
        return value

    def expr(self) -> float | None:
        value = self.term()
        while (tok := self.peek()) is not None and tok[1] in "+-":
            self.take()
            value = _fold(tok[1], value, self.term())
        return value

    def term(self) -> float | None:
        value = self.unary()
        while (tok := self.peek()) is not None and tok[1] in ("*", "/"):
            self.take()
            value = _fold(tok[1], value, self.unary())
        return value

    def unary(self) -> float | None:
        tok = self.peek()
        if tok is not None and tok[1] in "+-":
            self.take()
            self.nest()
            value = self.unary()
            self.depth -= 1
            return None if value is None else (-value if tok[1] == "-" else value)
        return self.power()

    def power(self) -> float | None:
        base = self.atom()
        tok = self.peek()
        if tok is None or tok[1] not in ("**", "^"):
            return base
        self.take()
        self.nest()
        exponent = self.unary()
        self.depth -= 1
        if exponent is not None and abs(exponent) > MAX_CONSTANT_POWER:
            raise DatabaseError(
                f"power with exponent {exponent:g}; at most {MAX_CONSTANT_POWER:g} is accepted"
            )
        return _fold("**", base, exponent)

    def atom(self) -> float | None:
        kind, text = self.take()
        if kind == "num":
            return _literal(text)
        if text == "(":
            self.nest()
            value = self.expr()
            self._close()
            self.depth -= 1
            return value
        if kind == "name":
            return self._name(text)
        raise DatabaseError(f"unexpected {text!r} in expression")

    def _close(self) -> None:
        _, text = self.take()
        if text != ")":
            raise DatabaseError(f"expected ')' in expression, found {text!r}")

    def _name(self, text: str) -> float | None:
        name = text.rstrip("#")
        if name.startswith("__"):
            raise DatabaseError(
                f"name {text!r} not accepted in an expression (names may not begin with '__')"
            )
        tok = self.peek()
        if tok is None or tok[1] != "(":
            return None
        if name not in ALLOWED_FUNCTIONS:
            raise DatabaseError(
                f"call of {name!r} not accepted in an expression; "
                f"functions: {', '.join(sorted(ALLOWED_FUNCTIONS))}"
            )
        self.take()
        self.nest()
        arg = self.expr()
        self._close()
        self.depth -= 1
        return None if arg is None else _fold(name, arg, None)


def _literal(text: str) -> float:
    mantissa = re.split(r"[ED]", text)[0]
    if sum(ch.isdigit() for ch in mantissa) > MAX_LITERAL_DIGITS:
        raise DatabaseError(f"number {text[:20]}... has more than {MAX_LITERAL_DIGITS} digits")
    value = float(text.replace("D", "E"))
    if not math.isfinite(value) or abs(value) > MAX_CONSTANT_VALUE:
        raise DatabaseError(f"number {text[:40]!r} is out of range (|value| <= {MAX_CONSTANT_VALUE:g})")
    return value


def _fold(op: str, left: float | None, right: float | None) -> float | None:
    """Fold a constant operation in floating point; refuse overflow and undefined values."""
    if left is None or (right is None and op not in ALLOWED_FUNCTIONS):
        return None
    try:
        if op == "+":
            v = left + right  # type: ignore[operator]
        elif op == "-":
            v = left - right  # type: ignore[operator]
        elif op == "*":
            v = left * right  # type: ignore[operator]
        elif op == "/":
            v = left / right  # type: ignore[operator]
        elif op == "**":
            v = float(left**right)  # type: ignore[operator]
        elif op == "EXP":
            v = math.exp(left)
        else:  # LN, LOG
            v = math.log(left)
    except (ZeroDivisionError, OverflowError, ValueError, TypeError):
        raise DatabaseError(f"constant {op} in expression is undefined or out of range") from None
    if not math.isfinite(v) or abs(v) > MAX_CONSTANT_VALUE:
        raise DatabaseError(
            f"constant {op} in expression is out of range (|value| <= {MAX_CONSTANT_VALUE:g})"
        )
    return v


def check_expression(expr: str) -> None:
    """Check one TDB expression (one temperature range) against the guards.

    Accepted: numbers, names (functions are referenced with a trailing ``#``), ``+ - * / ** ^``, parentheses,
    and calls of LN, LOG, EXP. Refused: anything else (quotes, dots outside numbers, brackets, commas inside,
    ``__names``, calls of other names), more than `MAX_EXPRESSION_CHARS` characters, nesting deeper than
    `MAX_NESTING`, literals with more than `MAX_LITERAL_DIGITS` digits, constant powers with an exponent above
    `MAX_CONSTANT_POWER`, and constants that overflow or are undefined.

    Raises
    ------
    DatabaseError
        The expression breaks a rule (the message says which).
    """
    text = expr.strip().strip(",").strip()
    if len(text) > MAX_EXPRESSION_CHARS:
        raise DatabaseError(
            f"expression of {len(text)} characters; at most {MAX_EXPRESSION_CHARS} are accepted"
        )
    if text.count("(") > MAX_EXPRESSION_CHARS // 4:
        raise DatabaseError("expression has too many parentheses")
    _ExprParser(_tokens(text)).parse()


_FLOAT_RE = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[EeDd][+-]?\d+)?$")


def split_ranges(text: str) -> list[str]:
    """The expressions of a TDB range text ``T0 expr0; T1 Y expr1; T2 N [ref]`` (limits and flags dropped).

    Conservative: where the text is ambiguous, more of it is returned as expression (and checked), never less.
    The text after the last ``;`` is never an expression to pycalphad's reader, nor the text after a flag N.
    """
    pieces = text.split(";")
    exprs: list[str] = []
    for i, piece in enumerate(pieces):
        if i == len(pieces) - 1 and i > 0:
            break  # after the last ';': an upper limit, a flag and a reference, never an expression
        words = piece.replace(",", " ").split()
        if words and _FLOAT_RE.match(words[0]) and (i > 0 or len(words) > 1):
            words = words[1:]
        if i > 0 and words and words[0].upper() == "N":
            break
        if i > 0 and words and words[0].upper() == "Y":
            words = words[1:]
        if words:
            exprs.append(" ".join(words))
    return exprs


def evaluate_constant(expr: str, temperature: float) -> float | None:
    """The value of an expression at a temperature, or None when it names anything but T (pure text)."""
    text = re.sub(r"(?<![A-Z0-9_.])T#*(?![A-Z0-9_#])", f"({float(temperature)!r})", expr.upper())
    return _ExprParser(_tokens(text)).parse()
