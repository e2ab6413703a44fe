"""One case of a sweep: the inputs of one solvus line, validated and normalized.

Imports nothing heavy: a job file is checked completely before pycalphad or xarray is loaded.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import os
import re
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, fields
from typing import Any

from solubility.errors import InputError, JobError

__all__ = ["CASE_KEYS", "DEFAULT_PRESSURE", "REQUIRED_KEYS", "Case", "job_sha256"]

#: standard atmospheric pressure, Pa
DEFAULT_PRESSURE = 101325.0

#: keys of a case, in the order they are documented
CASE_KEYS = ("name", "database", "phase", "solute", "temperatures", "exclude", "fix", "balance", "pressure")
REQUIRED_KEYS = ("name", "database", "phase", "solute", "temperatures")

#: temperatures are rounded to this many decimals (1 uK), so that grids written differently share points
T_DECIMALS = 6

_ELEMENT = re.compile(r"^[A-Za-z]{1,2}$")
_PHASE = re.compile(r"^[A-Za-z][A-Za-z0-9_#]*$")
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


def _kind(value: Any) -> str:
    """The TOML-ish name of the type of `value`, for messages."""
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, int | float):
        return "a number"
    if isinstance(value, str):
        return "a string"
    if isinstance(value, Mapping):
        return "a table"
    if isinstance(value, list | tuple):
        return "a list"
    return f"a {type(value).__name__}"


def _fail(where: str, key: str, message: str) -> JobError:
    return JobError(f"{where}: key {key!r}: {message}")


def _number(value: Any, where: str, key: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise _fail(where, key, f"expected a number, got {_kind(value)} ({value!r})")
    number = float(value)
    if not math.isfinite(number):
        raise _fail(where, key, f"{value!r} is not a finite number")
    return number


def _text(value: Any, where: str, key: str) -> str:
    if not isinstance(value, str):
        raise _fail(where, key, f"expected a string, got {_kind(value)} ({value!r})")
    text = value.strip()
    if not text:
        raise _fail(where, key, "is empty")
    if _CONTROL.search(text):
        raise _fail(where, key, f"{value!r} contains control characters")
    return text


def _database(value: Any, where: str, key: str) -> str:
    if isinstance(value, os.PathLike):
        value = os.fspath(value)
    if not isinstance(value, str):
        raise _fail(where, key, f"expected a path or the name of a bundled database, got {_kind(value)}")
    return _text(value, where, key)


def _element(value: Any, where: str, key: str) -> str:
    text = _text(value, where, key)
    if not _ELEMENT.match(text):
        raise _fail(
            where, key, f"{value!r} is not an element symbol (one or two letters, such as 'C' or 'CR')"
        )
    return text.upper()


def _phase(value: Any, where: str, key: str) -> str:
    text = _text(value, where, key)
    if not _PHASE.match(text):
        raise _fail(
            where, key, f"{value!r} is not a phase name (letters, digits, '_' and '#', such as 'BCC_A2')"
        )
    return text.upper()


def _temperatures(value: Any, where: str, key: str) -> tuple[float, ...]:
    """A START:STOP:STEP string (STOP included) or a list of temperatures in K -> increasing tuple, K."""
    if isinstance(value, str):
        from solubility.results.dataset import parse_temperatures  # light module-level imports only (numpy)

        try:
            values = [float(t) for t in parse_temperatures(value)]
        except InputError as exc:
            raise _fail(where, key, str(exc)) from None
    elif isinstance(value, Sequence) or _is_array(value):
        values = [_number(t, where, key) for t in list(value)]
    else:
        raise _fail(
            where, key, f"expected a 'START:STOP:STEP' string or a list of numbers, got {_kind(value)}"
        )
    if not values:
        raise _fail(where, key, "no temperatures given")
    values = [round(t, T_DECIMALS) for t in values]
    if min(values) <= 0:
        raise _fail(where, key, f"temperatures must be greater than 0 K, got {min(values):g}")
    if any(b <= a for a, b in itertools.pairwise(values)):
        raise _fail(where, key, "temperatures must be strictly increasing")
    return tuple(values)


def _is_array(value: Any) -> bool:
    return hasattr(value, "ndim") and getattr(value, "ndim", 0) == 1 and hasattr(value, "tolist")


def _exclude(value: Any, where: str, key: str) -> tuple[str, ...]:
    if isinstance(value, str) or not isinstance(value, Sequence):
        raise _fail(where, key, f"expected a list of phase names, got {_kind(value)} ({value!r})")
    return tuple(sorted({_phase(p, where, key) for p in value}))


def _fix(value: Any, where: str, key: str) -> tuple[tuple[str, float], ...]:
    """A table {element: u-fraction} (or pairs) -> sorted pairs; each u in [0, 1), their sum below 1."""
    if isinstance(value, Mapping):
        items = list(value.items())
    elif (
        isinstance(value, Sequence)
        and not isinstance(value, str)
        and all(isinstance(p, Sequence) and not isinstance(p, str) and len(p) == 2 for p in value)
    ):
        items = [tuple(p) for p in value]
    else:
        raise _fail(where, key, f"expected a table of element = u-fraction, got {_kind(value)} ({value!r})")
    pairs: dict[str, float] = {}
    for element, fraction in items:
        symbol = _element(element, where, f"{key}.{element}")
        if symbol in pairs:
            raise _fail(where, f"{key}.{element}", "is given twice")
        u = _number(fraction, where, f"{key}.{element}")
        if not 0 <= u < 1:
            raise _fail(where, f"{key}.{element}", f"u-fraction {u:g} is outside [0, 1)")
        pairs[symbol] = u
    if sum(pairs.values()) >= 1:
        raise _fail(
            where, key, f"u-fractions add up to {sum(pairs.values()):g}; they must add up to less than 1"
        )
    return tuple(sorted(pairs.items()))


def _balance(value: Any, where: str, key: str) -> str | None:
    return None if value is None else _element(value, where, key)


def _pressure(value: Any, where: str, key: str) -> float:
    pressure = _number(value, where, key)
    if pressure <= 0:
        raise _fail(where, key, f"pressure must be greater than 0 Pa, got {pressure:g}")
    return pressure


#: key -> validator returning the normalized value
_VALIDATORS: dict[str, Callable[[Any, str, str], Any]] = {
    "name": _text,
    "database": _database,
    "phase": _phase,
    "solute": _element,
    "temperatures": _temperatures,
    "exclude": _exclude,
    "fix": _fix,
    "balance": _balance,
    "pressure": _pressure,
}


@dataclass(frozen=True)
class Case:
    """The inputs of one solvus line in a sweep (validated and normalized on construction).

    Parameters
    ----------
    name
        Unique name of the case in its sweep; it becomes the ``case`` coordinate.
    database
        Path of a TDB file or name of a bundled database (`solubility.databases.reader.bundled_databases`). A relative
        path is relative to the current folder (`read_job` makes job-file paths absolute).
    phase
        Host phase, such as ``"BCC_A2"`` (upper-cased).
    solute
        Interstitial element, such as ``"C"`` (upper-cased).
    temperatures
        Temperatures in K: a ``"START:STOP:STEP"`` string (STOP included) or a sequence of numbers, stored
        as a strictly increasing tuple of floats rounded to 1 uK (``T_DECIMALS`` = 6 decimals).
    exclude
        Phases left out of the equilibrium, stored sorted and upper-cased.
    fix
        u-fractions of other host elements (a mapping such as ``{"CR": 0.02}``), each in [0, 1), summing to
        less than 1; stored as sorted ``(element, u)`` pairs (`fix_dict` gives the mapping back). An element
        at u = 0 is left out of the calculation (the alloy without it), but kept in the case.
    balance
        The host's balance element, needed only when its substitutional sublattice holds several elements not
        given in `fix` (see `solubility.solvus`); None lets the solvus find it.
    pressure
        Pressure in Pa (> 0), default 101325.

    Raises
    ------
    JobError
        A value is missing, of the wrong type or out of range; the message names the case and the key.
    """

    name: str
    database: str
    phase: str
    solute: str
    temperatures: tuple[float, ...]
    exclude: tuple[str, ...] = ()
    fix: tuple[tuple[str, float], ...] = ()
    balance: str | None = None
    pressure: float = DEFAULT_PRESSURE

    def __post_init__(self) -> None:
        name = self.name if isinstance(self.name, str) and self.name.strip() else None
        where = f"case {name!r}" if name else "case"
        for f in fields(self):
            object.__setattr__(self, f.name, _VALIDATORS[f.name](getattr(self, f.name), where, f.name))
        fixed = dict(self.fix)
        if self.solute in fixed:
            raise _fail(where, f"fix.{self.solute}", "the solute cannot also be a fixed host element")
        if self.balance is not None and (self.balance in fixed or self.balance == self.solute):
            raise _fail(where, "balance", f"{self.balance!r} is also the solute or a fixed element")
        if self.phase in self.exclude:
            raise _fail(where, "exclude", f"the host phase {self.phase!r} cannot be excluded")

    @classmethod
    def from_mapping(cls, mapping: Mapping[str, Any], where: str = "case") -> Case:
        """Build a case from a mapping of the keys in `CASE_KEYS`, naming `where` in every error.

        Raises
        ------
        JobError
            A key is missing or unknown (with the closest accepted key), or a value is invalid.
        """
        check_keys(mapping, where, CASE_KEYS, REQUIRED_KEYS)
        values = {key: _VALIDATORS[key](mapping[key], where, key) for key in CASE_KEYS if key in mapping}
        try:
            return cls(**values)
        except JobError as exc:  # cross-key checks name the case by its name; keep the caller's context
            raise JobError(f"{where}: {str(exc).split(': ', 1)[1]}") from None

    @property
    def fix_dict(self) -> dict[str, float]:
        """The fixed u-fractions as a mapping ``{element: u}``."""
        return dict(self.fix)

    @property
    def solvus_fix(self) -> dict[str, float] | None:
        """The u-fractions passed to `solubility.solvus`: those above zero, or None."""
        return {el: u for el, u in self.fix if u > 0} or None

    @property
    def system_key(self) -> tuple[Any, ...]:
        """What the thermo system of this case depends on (database, components, excluded phases, pressure).

        Cases with equal keys reuse one compiled system in a worker; executors send them to the same worker.
        """
        fixed = tuple(el for el, u in self.fix if u > 0)
        return (self.database, self.solute, fixed, self.balance, self.exclude, self.pressure)

    def to_dict(self) -> dict[str, Any]:
        """The normalized inputs as JSON-safe values (temperatures a list in K, fix a table)."""
        return {
            "name": self.name,
            "database": self.database,
            "phase": self.phase,
            "solute": self.solute,
            "temperatures": list(self.temperatures),
            "exclude": list(self.exclude),
            "fix": self.fix_dict,
            "balance": self.balance,
            "pressure": self.pressure,
        }

    def sha256(self) -> str:
        """SHA-256 of the canonical JSON of `to_dict` (identifies the case in a store)."""
        return _digest(self.to_dict())


def _digest(obj: Any) -> str:
    text = json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def job_sha256(cases: Iterable[Case]) -> str:
    """SHA-256 identifying a job: the canonical JSON of its normalized cases, in order."""
    return _digest([case.to_dict() for case in cases])


def check_keys(
    mapping: Mapping[str, Any], where: str, accepted: Sequence[str], required: Sequence[str]
) -> None:
    """Raise a JobError for the first unknown key (suggesting a close match) or missing key of `mapping`."""
    if not isinstance(mapping, Mapping):
        raise JobError(f"{where}: expected a table, got {_kind(mapping)}")
    for key in mapping:
        if key not in accepted:
            raise JobError(f"{where}: key {key!r} is unknown{suggest(key, accepted)}")
    for key in required:
        if key not in mapping:
            raise JobError(f"{where}: key {key!r} is missing (required: {', '.join(required)})")


def suggest(word: str, accepted: Sequence[str]) -> str:
    """``"; did you mean 'x'?"`` for the closest of `accepted`, else the list of accepted words."""
    import difflib

    close = difflib.get_close_matches(str(word), list(accepted), n=1, cutoff=0.6)
    if close:
        return f"; did you mean {close[0]!r}?"
    return f" (accepted: {', '.join(accepted)})"


def check_unique_names(cases: Sequence[Case], where: Sequence[str] | None = None) -> None:
    """Raise a JobError naming both places when two cases share a name."""
    first: dict[str, int] = {}
    for i, case in enumerate(cases):
        if case.name in first:
            j = first[case.name]
            here = where[i] if where else f"case {i + 1}"
            there = where[j].split(": ", 1)[-1] if where else f"case {j + 1}"  # without the file name
            raise JobError(f"{here}: key 'name': {case.name!r} is already the name of {there}")
        first[case.name] = i
