"""Job files: TOML tables of cases, with defaults and cartesian products, validated before any work.

A job file has three optional top-level tables (at least one case in all):

``[defaults]``
    Any case key but ``name``; applied to every case and product that does not give the key itself (a key
    given in a case replaces the default whole, tables such as ``fix`` are not merged).
``[[case]]``
    One case per table: ``name``, ``database``, ``phase``, ``solute``, ``temperatures`` (required, unless
    in the defaults), ``exclude``, ``fix``, ``pressure``.
``[[product]]``
    Many cases at once: the keys of a case, where ``name`` is a template, plus a ``[product.vary]`` table
    whose every key holds a list of alternatives; one case is made for every combination (the first key varies
    slowest). ``vary.fix`` is either a table of element = list of u-fractions (each element varies on its
    own) or a list of whole ``fix`` tables. The template refers to the varied values as ``{phase}``,
    ``{database}``, ``{fix.CR}``, ``{temperatures}``, ... and to the combination number as ``{index}``
    (from 1).

Cases come in the order of the file: every ``[[case]]``, then every product's combinations.
"""

from __future__ import annotations

import itertools
import os
import re
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from solubility.errors import JobError
from solubility.sweeps.case import CASE_KEYS, Case, _kind, check_keys, check_unique_names, suggest

__all__ = ["parse_job", "read_job"]

TOP_KEYS = ("defaults", "case", "product")
DEFAULT_KEYS = tuple(k for k in CASE_KEYS if k != "name")
PRODUCT_KEYS = (*CASE_KEYS, "vary")
VARY_KEYS = DEFAULT_KEYS
_PLACEHOLDER = re.compile(r"\{([^{}]*)\}")


def read_job(path: str | os.PathLike) -> list[Case]:
    """Read and validate a TOML job file.

    Parameters
    ----------
    path
        The job file. A ``database`` value naming a file that exists relative to the job file's folder is
        made an absolute path; any other value is kept (a bundled database name or a path from the current
        folder).

    Returns
    -------
    list of Case
        The cases, in the order of the file (``[[case]]`` tables, then each product's combinations).

    Raises
    ------
    JobError
        The file cannot be read, is not valid TOML (the message gives the line), or a table has a missing,
        unknown or invalid key, or two cases share a name; the message names the case and the key.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise JobError(f"job file {str(p)!r} does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise JobError(f"job file {str(p)!r} cannot be read: {exc}") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise JobError(f"{p.name}: invalid TOML: {exc}") from None
    return parse_job(data, source=p.name, folder=p.parent)


def parse_job(
    data: Mapping[str, Any], *, source: str = "job", folder: str | os.PathLike | None = None
) -> list[Case]:
    """Validate a job given as a mapping (the parsed TOML) and return its cases.

    Parameters
    ----------
    data
        Mapping with the optional keys ``defaults``, ``case`` and ``product`` (see the module docstring).
    source
        Name used at the start of every error message (the job file's name).
    folder
        Folder against which relative database paths are resolved (None: leave them as given).

    Raises
    ------
    JobError
        As `read_job`.
    """
    check_keys(data, source, TOP_KEYS, ())
    defaults = _table(data.get("defaults", {}), f"{source}: [defaults]")
    check_keys(defaults, f"{source}: [defaults]", DEFAULT_KEYS, ())
    entries: list[tuple[str, dict[str, Any]]] = []
    for i, table in enumerate(_tables(data, "case", source), start=1):
        where = _case_where(source, i, table)
        check_keys(table, where, CASE_KEYS, ())
        entries.append((where, {**defaults, **table}))
    for i, table in enumerate(_tables(data, "product", source), start=1):
        entries.extend(_expand(table, defaults, f"{source}: product {i}"))
    if not entries:
        raise JobError(f"{source}: no cases; add [[case]] or [[product]] tables")
    cases = [Case.from_mapping(_resolve(mapping, folder), where) for where, mapping in entries]
    check_unique_names(cases, [where for where, _ in entries])
    return cases


def _case_where(source: str, i: int, table: Any) -> str:
    name = table.get("name") if isinstance(table, Mapping) else None
    return f"{source}: case {i} ({name!r})" if isinstance(name, str) else f"{source}: case {i}"


def _table(value: Any, where: str) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise JobError(f"{where}: expected a table, got {_kind(value)}")
    return value


def _tables(data: Mapping[str, Any], key: str, source: str) -> list[Mapping[str, Any]]:
    value = data.get(key, [])
    if isinstance(value, Mapping):
        raise JobError(f"{source}: [{key}] must be an array of tables: write [[{key}]]")
    if not isinstance(value, list) or not all(isinstance(t, Mapping) for t in value):
        raise JobError(f"{source}: key {key!r}: expected [[{key}]] tables, got {_kind(value)}")
    return value


def _resolve(mapping: dict[str, Any], folder: str | os.PathLike | None) -> dict[str, Any]:
    """Make a database path relative to the job file absolute when that file exists."""
    db = mapping.get("database")
    if folder is None or not isinstance(db, str) or not db.strip() or Path(db).is_absolute():
        return mapping
    candidate = Path(folder) / db.strip()
    if candidate.is_file():
        return {**mapping, "database": str(candidate.resolve())}
    return mapping


def _expand(table: Mapping[str, Any], defaults: Mapping[str, Any], where: str) -> list[tuple[str, dict]]:
    """The (where, mapping) of every combination of a ``[[product]]`` table."""
    check_keys(table, where, PRODUCT_KEYS, ("name", "vary"))
    template = table["name"]
    if not isinstance(template, str) or not template.strip():
        raise JobError(f"{where}: key 'name': expected a name template string, got {_kind(template)}")
    axes = _axes(_table(table["vary"], f"{where}: [product.vary]"), where)
    fixed = {k: v for k, v in table.items() if k not in ("name", "vary")}
    out = []
    for index, combination in enumerate(itertools.product(*(values for _, values in axes)), start=1):
        mapping: dict[str, Any] = {**defaults, **fixed}
        labels: dict[str, str] = {"index": str(index)}
        for (key, _), value in zip(axes, combination, strict=True):
            _assign(mapping, labels, key, value)
        name = _render(template, labels, where)
        mapping["name"] = name
        out.append((f"{where}, combination {index} ({name!r})", mapping))
    return out


def _axes(vary: Mapping[str, Any], where: str) -> list[tuple[str, list[Any]]]:
    """Each varied key (``fix.EL`` for an element varied on its own) with its list of alternatives."""
    if not vary:
        raise JobError(f"{where}: [product.vary] is empty; give at least one key with a list of alternatives")
    check_keys(vary, f"{where}: [product.vary]", VARY_KEYS, ())
    axes = []
    for key, values in vary.items():
        if key == "fix" and isinstance(values, Mapping):
            for element, fractions in values.items():
                axes.append((f"fix.{element}", _alternatives(fractions, where, f"vary.fix.{element}")))
        else:
            axes.append((key, _alternatives(values, where, f"vary.{key}")))
    return axes


def _alternatives(values: Any, where: str, key: str) -> list[Any]:
    if not isinstance(values, list):
        raise JobError(
            f"{where}: key {key!r}: expected a list of alternatives, got {_kind(values)} ({values!r})"
        )
    if not values:
        raise JobError(f"{where}: key {key!r}: the list of alternatives is empty")
    return values


def _assign(mapping: dict[str, Any], labels: dict[str, str], key: str, value: Any) -> None:
    """Put one varied value into the case mapping and its label(s) into `labels`."""
    if key.startswith("fix."):
        element = key[4:]
        mapping["fix"] = {**_as_table(mapping.get("fix", {})), element: value}
        labels[key] = _label(value)
    elif key == "fix":
        mapping["fix"] = value
        if isinstance(value, Mapping):
            labels.update({f"fix.{el}": _label(u) for el, u in value.items()})
        labels["fix"] = _label(value)
    else:
        mapping[key] = value
        labels[key] = _label(value)


def _as_table(value: Any) -> dict[str, Any]:
    return dict(value) if isinstance(value, Mapping) else {}


def _label(value: Any) -> str:
    """A short text for a varied value in a name template."""
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, Mapping):
        return "-".join(f"{k}{_label(v)}" for k, v in value.items()) or "none"
    if isinstance(value, list):
        if value and all(isinstance(v, int | float) and not isinstance(v, bool) for v in value):
            return f"{min(value):g}-{max(value):g}"
        return "-".join(_label(v) for v in value) or "none"
    text = str(value)
    return Path(text).stem if (os.sep in text or text.lower().endswith(".tdb")) else text


def _render(template: str, labels: Mapping[str, str], where: str) -> str:
    def replace(match: re.Match) -> str:
        field = match.group(1)
        if field not in labels:
            raise JobError(
                f"{where}: key 'name': placeholder {{{field}}} is not a varied key"
                f"{suggest(field, sorted(labels))}"
            )
        return labels[field]

    return _PLACEHOLDER.sub(replace, template)
