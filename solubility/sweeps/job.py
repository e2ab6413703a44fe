"""Cases and TOML job files, validated before any work (imports nothing heavy: no pycalphad, no xarray).

A job file has optional ``[defaults]`` (any case key but ``name``; a given key replaces the default whole),
``[[case]]`` tables (`Case`'s keys) and ``[[product]]`` tables: a case whose ``name`` is a template, plus a
``[product.vary]`` table of lists; one case is made per combination (the first key varies slowest).
``vary.fix`` is a table of element = list of u-fractions or a list of ``fix`` tables. The template names the
varied values (``{phase}``, ``{fix.CR}``, ``{pressure}``, ...), written as `number_label` writes numbers, and
``{index}`` (from 1). A job expands to at most `MAX_CASES` cases, counted before anything is expanded. Only the
TOML types are checked here: the values are checked by `solubility.calc.inputs` (the validator of the API and
the CLI) and `solubility.sweeps.kinds`, and their errors are given the case and the key.
"""

from __future__ import annotations

import dataclasses
import difflib
import hashlib
import itertools
import json
import math
import os
import re
import tomllib
from collections.abc import Mapping, Sequence
from decimal import Decimal
from pathlib import Path
from typing import Any

from solubility.calc.inputs import check_fix, check_pressure, parse_temperatures
from solubility.errors import InputError, JobError
from solubility.sweeps.kinds import KIND_KEYS, check_kind

__all__ = ["CASE_KEYS", "MAX_CASES", "Case", "job_sha256", "number_label", "parse_job", "read_job"]

#: the most cases one job may hold (a product is counted before it is expanded)
MAX_CASES = 10_000
CASE_KEYS = ("name", "database", "phase", "solute", "temperatures", "exclude", "fix", "balance", "pressure",
             *KIND_KEYS)
REQUIRED = ("name", "database", "phase", "solute", "temperatures")
_PLACEHOLDER = re.compile(r"\{([^{}]*)\}")
_PHASE = ("a phase name (letters, digits, '_' and '#', such as 'BCC_A2')", re.compile(r"^[A-Za-z][A-Za-z0-9_#]*$"))
_ELEMENT = ("an element symbol (one or two letters, such as 'C' or 'CR')", re.compile(r"^[A-Za-z]{1,2}$"))
#: per key: the TOML types accepted, what the message calls it, and the spelling of a name
_TYPES: dict[str, tuple[Any, str, Any]] = {
    "name": (str, "a name", None), "database": (str, "a path or a bundled database name", None),
    "phase": (str, *_PHASE), "solute": (str, *_ELEMENT),
    "temperatures": ((str, list, tuple), "a 'START:STOP:STEP' string or a list of numbers", None),
    "exclude": ((list, tuple), "a list of phase names", None), "balance": (str, *_ELEMENT),
    "pressure": ((int, float), "a number", None),
}


def _kind(value: Any) -> str:
    """What a TOML value is, in words."""
    kinds = {bool: "a boolean", int: "a number", float: "a number", str: "a string", dict: "a table", list: "a list"}
    return kinds.get(type(value), f"a {type(value).__name__}")


def _check(key: str, value: Any) -> Any:
    """One value of a case: its TOML type here, its value by `solubility.calc.inputs`; normalized."""
    types, what, pattern = _TYPES[key]
    if key == "balance" and value is None:
        return None
    value = os.fspath(value) if isinstance(value, os.PathLike) else value
    value = value.tolist() if hasattr(value, "tolist") else value  # a numpy array of temperatures
    text = value.strip() if isinstance(value, str) else ""
    bad_text = types is str and (not text or any(ord(c) < 32 or ord(c) == 127 for c in text))
    if isinstance(value, bool) or not isinstance(value, types) or bad_text:
        raise InputError(f"expected {what}, got {_kind(value)} ({value!r})")
    if key == "pressure":
        return check_pressure(value)
    if key == "exclude":
        return tuple(sorted({_check("phase", p) for p in value}))
    if key == "temperatures":
        if not isinstance(value, str) and any(isinstance(t, bool) or not isinstance(t, int | float) for t in value):
            raise InputError(f"expected a list of numbers in K, got {value!r}")
        values = [round(float(t), 6) for t in parse_temperatures(value)]  # 1 uK: grids written differently agree
        if any(b <= a for a, b in itertools.pairwise(values)):
            raise InputError("temperatures must be strictly increasing")
        return tuple(values)
    if pattern is not None and not pattern.match(text):
        raise InputError(f"{value!r} is not {what}")
    return text.upper() if pattern is not None else text


def _fix(value: Any, where: str) -> tuple[tuple[str, float], ...]:
    """A table {element: u} -> sorted pairs, each u checked by `check_fix` on its own (``fix.EL``), then all."""
    try:
        pairs = list(value.items() if isinstance(value, Mapping) else value)
        names = [_check("solute", el) for el, _ in pairs]
    except (TypeError, ValueError, InputError):
        raise JobError(f"{where}: key 'fix': expected a table of element = u-fraction, got {_kind(value)}") from None
    for el, (_, u) in zip(names, pairs, strict=True):
        try:
            if isinstance(u, bool) or not isinstance(u, int | float):
                raise InputError(f"expected a number, got {_kind(u)} ({u!r})")
            check_fix({el: u})
        except InputError as exc:
            raise JobError(f"{where}: key 'fix.{el}': {exc}") from None
    try:
        return tuple(sorted(check_fix(dict(pairs)).items()))
    except InputError as exc:
        raise JobError(f"{where}: key 'fix': {exc}") from None


@dataclasses.dataclass(frozen=True)
class Case:
    """The inputs of one solvus or uptake line in a sweep, validated and normalized on construction.

    Parameters
    ----------
    name, database, phase, solute, exclude, fix, balance, pressure
        As in `solubility.solvus`; the unique ``name`` is the ``case`` coordinate. Names are upper-cased,
        ``exclude`` stored sorted and ``fix`` as sorted ``(element, u)`` pairs; pressure in Pa (101325).
    temperatures
        K: ``"START:STOP:STEP"`` (STOP included) or numbers; stored strictly increasing, rounded to 1 uK.
    kind, activity, reference, partial_pressure, atmosphere, equilibrate_gas
        ``"solvus"`` (default) or ``"uptake"`` and its surroundings (`solubility.sweeps.kinds`).

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
    pressure: float = 101325.0
    kind: str = "solvus"
    activity: float | None = None
    reference: str | None = None
    partial_pressure: float | None = None
    atmosphere: str | None = None
    equilibrate_gas: bool = False

    def __post_init__(self) -> None:
        named = isinstance(self.name, str) and self.name.strip()
        where = f"case {self.name.strip()!r}" if named else "case"
        for key in _TYPES:
            try:
                object.__setattr__(self, key, _check(key, getattr(self, key)))
            except InputError as exc:
                raise JobError(f"{where}: key {key!r}: {exc}") from None
        object.__setattr__(self, "fix", _fix(self.fix, where))
        for key, value in check_kind({k: getattr(self, k) for k in KIND_KEYS}, where).items():
            object.__setattr__(self, key, value)
        if self.solute in self.fix_dict:
            raise JobError(f"{where}: key 'fix.{self.solute}': the solute cannot also be a fixed host element")
        if self.balance is not None and (self.balance in self.fix_dict or self.balance == self.solute):
            raise JobError(f"{where}: key 'balance': {self.balance!r} is also the solute or a fixed element")
        if self.phase in self.exclude:
            raise JobError(f"{where}: key 'exclude': the host phase {self.phase!r} cannot be excluded")

    @classmethod
    def from_mapping(cls, mapping: Mapping[str, Any], where: str = "case") -> Case:
        """A case from a mapping of `CASE_KEYS`; errors name `where` (a missing or unknown key too)."""
        check_keys(mapping, where, CASE_KEYS, REQUIRED)
        try:
            return cls(**mapping)
        except JobError as exc:  # name the place in the job file rather than the case name alone
            raise JobError(f"{where}: {str(exc).split(': ', 1)[1]}") from None

    @property
    def fix_dict(self) -> dict[str, float]:
        return dict(self.fix)

    @property
    def solvus_fix(self) -> dict[str, float] | None:
        """The u-fractions as `solubility.solvus` takes them."""
        return self.fix_dict or None

    @property
    def system_key(self) -> tuple:
        """What the compiled system depends on (database, elements, phases): cases sharing it reuse one system."""
        return (self.database, self.solute, tuple(self.fix_dict), self.balance, self.exclude)

    def to_dict(self) -> dict[str, Any]:
        """The normalized inputs as JSON values (a solvus case without the uptake keys, as before they existed)."""
        out = {**dataclasses.asdict(self), "temperatures": list(self.temperatures), "exclude": list(self.exclude),
               "fix": self.fix_dict}
        return {k: v for k, v in out.items() if k not in KIND_KEYS} if self.kind == "solvus" else out

    def sha256(self) -> str:
        return _digest(self.to_dict())


def _digest(obj: Any) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True, separators=(",", ":")).encode()).hexdigest()


def job_sha256(cases: Sequence[Case]) -> str:
    """SHA-256 of the canonical JSON of the normalized cases, in order."""
    return _digest([c.to_dict() for c in cases])


def suggest(word: str, accepted: Sequence[str]) -> str:
    close = difflib.get_close_matches(str(word), list(accepted), n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else f" (accepted: {', '.join(accepted)})"


def check_keys(mapping: Any, where: str, accepted: Sequence[str], required: Sequence[str] = ()) -> None:
    """A JobError for a value that is not a table, the first unknown key (with a suggestion) or a missing key."""
    if not isinstance(mapping, Mapping):
        raise JobError(f"{where}: expected a table, got {_kind(mapping)}")
    for key in mapping:
        if key not in accepted:
            raise JobError(f"{where}: key {key!r} is unknown{suggest(key, accepted)}")
    for key in required:
        if key not in mapping:
            raise JobError(f"{where}: key {key!r} is missing (required: {', '.join(required)})")


def check_unique_names(cases: Sequence[Case], where: Sequence[str]) -> None:
    first: dict[str, int] = {}
    for i, case in enumerate(cases):
        if case.name in first:
            there = where[first[case.name]].split(": ", 1)[-1]
            raise JobError(f"{where[i]}: key 'name': {case.name!r} is already the name of {there}")
        first[case.name] = i


def read_job(path: str | os.PathLike) -> list[Case]:
    """Read and validate a TOML job file; database paths that exist beside the job file are made absolute.

    Raises
    ------
    JobError
        The file cannot be read, is not TOML (the message gives the line), a table has a missing, unknown or
        invalid key, two cases share a name, or the job expands to more than `MAX_CASES` cases.
    """
    p = Path(path)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise JobError(f"job file {str(p)!r} does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise JobError(f"job file {str(p)!r} cannot be read: {exc}") from None
    except (tomllib.TOMLDecodeError, RecursionError) as exc:
        raise JobError(f"{p.name}: invalid TOML: {exc or 'nested too deeply'}") from None
    return parse_job(data, source=p.name, folder=p.parent)


def parse_job(data: Mapping[str, Any], *, source: str = "job", folder: str | os.PathLike | None = None) -> list[Case]:
    """The cases of a parsed job (see the module docstring); `folder` resolves relative database paths."""
    check_keys(data, source, ("defaults", "case", "product"))
    defaults = data.get("defaults", {})
    check_keys(defaults, f"{source}: [defaults]", CASE_KEYS[1:])
    tables = {key: _tables(data, key, source) for key in ("case", "product")}
    for i, table in enumerate(tables["product"], start=1):
        check_keys(table, f"{source}: product {i}", (*CASE_KEYS, "vary"), ("name", "vary"))
    products = [(t, _axes(t["vary"], f"{source}: product {i}")) for i, t in enumerate(tables["product"], start=1)]
    total = len(tables["case"]) + sum(math.prod(len(v) for _, v in axes) for _, axes in products)
    if total > MAX_CASES:
        raise JobError(f"{source}: the job expands to {total:,} cases; at most {MAX_CASES:,} are accepted in one"
                       " job (split it into several jobs)")
    entries = []
    for i, table in enumerate(tables["case"], start=1):
        name = table.get("name") if isinstance(table, Mapping) else None
        where = f"{source}: case {i} ({name!r})" if isinstance(name, str) else f"{source}: case {i}"
        check_keys(table, where, CASE_KEYS)
        entries.append((where, {**defaults, **table}))
    for i, (table, axes) in enumerate(products, start=1):
        entries.extend(_expand(table, axes, defaults, f"{source}: product {i}"))
    if not entries:
        raise JobError(f"{source}: no cases; add [[case]] or [[product]] tables")
    cases = [Case.from_mapping(_resolve(m, folder), where) for where, m in entries]
    check_unique_names(cases, [where for where, _ in entries])
    return cases


def _tables(data: Mapping[str, Any], key: str, source: str) -> list:
    value = data.get(key, [])
    if isinstance(value, Mapping):
        raise JobError(f"{source}: [{key}] must be an array of tables: write [[{key}]]")
    if not isinstance(value, list) or not all(isinstance(t, Mapping) for t in value):
        raise JobError(f"{source}: key {key!r}: expected [[{key}]] tables, got {_kind(value)}")
    return value


def _resolve(mapping: dict[str, Any], folder: str | os.PathLike | None) -> dict[str, Any]:
    db = mapping.get("database")
    if folder is None or not isinstance(db, str) or not db.strip() or Path(db).is_absolute():
        return mapping
    candidate = Path(folder) / db.strip()
    return {**mapping, "database": str(candidate.resolve())} if candidate.is_file() else mapping


def _axes(vary: Any, where: str) -> list[tuple[str, list]]:
    """Each varied key (``fix.EL`` for an element varied on its own) with its non-empty list of alternatives."""
    check_keys(vary, f"{where}: [product.vary]", CASE_KEYS[1:])
    if not vary:
        raise JobError(f"{where}: [product.vary] is empty; give at least one key with a list of alternatives")
    split = [(f"fix.{el}", v) for el, v in vary["fix"].items()] if isinstance(vary.get("fix"), Mapping) else []
    axes = [(k, v) for k, v in vary.items() if not (k == "fix" and split)] + split
    for key, values in axes:
        if not isinstance(values, list) or not values:
            got = "an empty list" if values == [] else f"{_kind(values)} ({values!r})"
            raise JobError(f"{where}: key 'vary.{key}': expected a list of alternatives, got {got}")
    return axes


def _expand(table: Mapping[str, Any], axes: list, defaults: Mapping[str, Any], where: str) -> list[tuple[str, dict]]:
    template = table["name"]
    if not isinstance(template, str) or not template.strip():
        raise JobError(f"{where}: key 'name': expected a name template string, got {_kind(template)}")
    fixed = {k: v for k, v in table.items() if k not in ("name", "vary")}
    out = []
    for index, combination in enumerate(itertools.product(*(v for _, v in axes)), start=1):
        mapping, labels = {**defaults, **fixed}, {"index": str(index)}
        for (key, _), value in zip(axes, combination, strict=True):
            if key.startswith("fix."):
                mapping["fix"] = {**(mapping.get("fix") if isinstance(mapping.get("fix"), Mapping) else {}),
                                  key[4:]: value}
            else:
                mapping[key] = value
                if key == "fix" and isinstance(value, Mapping):
                    labels.update({f"fix.{el}": label(u) for el, u in value.items()})
            labels[key] = label(value)
        mapping["name"] = _render(template, labels, where)
        out.append((f"{where}, combination {index} ({mapping['name']!r})", mapping))
    return out


def number_label(value: float) -> str:
    """A number as it appears in a case name: ``1e5``, ``2.5e9``, ``1e-4``, ``1000``, ``0.02`` (no ``+``)."""
    if value == 0 or 1e-3 <= abs(value) < 1e5:
        text = repr(float(value))
        return text[:-2] if text.endswith(".0") else text
    sign, digits, exponent = Decimal(repr(float(value))).normalize().as_tuple()  # the shortest digits
    mantissa = "".join(map(str, digits))
    mantissa = mantissa[0] + (f".{mantissa[1:]}" if len(mantissa) > 1 else "")
    return f"{'-' if sign else ''}{mantissa}e{exponent + len(digits) - 1}"


def label(value: Any) -> str:
    """A short text for a varied value in a name template."""
    if isinstance(value, int | float) and not isinstance(value, bool):
        return number_label(value)
    if isinstance(value, Mapping):
        return "-".join(f"{k}{label(v)}" for k, v in value.items()) or "none"
    if isinstance(value, list):
        if value and all(isinstance(v, int | float) and not isinstance(v, bool) for v in value):
            return f"{number_label(min(value))}-{number_label(max(value))}"
        return "-".join(label(v) for v in value) or "none"
    text = str(value)
    return Path(text).stem if (os.sep in text or text.lower().endswith(".tdb")) else text


def _render(template: str, labels: Mapping[str, str], where: str) -> str:
    def replace(match: re.Match) -> str:
        if match.group(1) not in labels:
            raise JobError(f"{where}: key 'name': placeholder {{{match.group(1)}}} is not a varied key"
                           f"{suggest(match.group(1), sorted(labels))}")
        return labels[match.group(1)]

    return _PLACEHOLDER.sub(replace, template)
