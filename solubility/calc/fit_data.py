"""The data file of a fit: measured solubility points, each a solvus point, a gas point or a point at an activity.

CSV columns: ``T_K``; one of ``x``, ``wt_percent``, ``ppm``; optional ``partner`` (a solvus point against that
phase; empty: against whichever phase the engine finds), ``p_Pa`` (a point in equilibrium with the pure diatomic
gas X2 at that partial pressure), ``activity`` (a point at that activity of the solute against its reference
state), ``sigma_rel`` (relative standard uncertainty of the content), ``source``. A row gives at most one of
``partner``, ``p_Pa`` and ``activity``.
"""

from __future__ import annotations

import csv
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from solubility.errors import InputError

#: largest data file accepted, bytes (a measured solubility data set is kilobytes)
MAX_DATA_BYTES = 4 * 1024 * 1024

__all__ = ["FitData", "free_symbols", "read_fit_data"]

_COMPOSITION_COLUMNS = ("x", "wt_percent", "ppm")
_KNOWN = {"T_K", *_COMPOSITION_COLUMNS, "partner", "p_Pa", "activity", "sigma_rel", "source"}
_COLUMNS = "T_K; one of x, wt_percent, ppm; optional partner, p_Pa, activity, sigma_rel, source"


@dataclass(frozen=True)
class FitData:
    """Measured points.

    Attributes
    ----------
    T
        Temperatures, K.
    x
        Mole fractions of the solute.
    sigma_rel
        Relative standard uncertainties (1 where the file gives none; then `weighted` is False).
    partner
        Partner phase of a solvus point ("" for any, or for a gas or activity point).
    source
        The ``source`` column ("" where empty).
    kind
        Per point: "solvus", "p_Pa" (value = partial pressure of X2, Pa) or "activity" (value = activity).
    value
        Per point: the partial pressure or the activity (nan for a solvus point).
    """

    T: np.ndarray
    x: np.ndarray
    sigma_rel: np.ndarray
    partner: tuple[str, ...]
    source: tuple[str, ...]
    weighted: bool
    kind: tuple[str, ...] = ()
    value: np.ndarray | None = None

    def __post_init__(self) -> None:
        if not self.kind:
            object.__setattr__(self, "kind", ("solvus",) * len(self.T))
        if self.value is None:
            object.__setattr__(self, "value", np.full(len(self.T), np.nan))

    @property
    def has_solvus(self) -> bool:
        """Whether any point is a solvus point (the host then needs a partner phase)."""
        return "solvus" in self.kind

    def conditions(self) -> list[tuple[str, float]]:
        """The distinct (kind, value) of the gas and activity points, in order of first appearance."""
        out: list[tuple[str, float]] = []
        for k, v in zip(self.kind, self.value, strict=True):
            if k != "solvus" and (k, float(v)) not in out:
                out.append((k, float(v)))
        return out


def read_fit_data(path: str | Path, *, molar_masses: Mapping[str, float] | None = None, solute: str = "",
                  host: str = "") -> FitData:
    """Read a data CSV (module docstring).

    wt_percent and ppm (by mass) are converted to mole fractions of a binary host-solute alloy with
    `molar_masses` (g/mol).

    Raises
    ------
    InputError
        A missing or unknown column, a value that is not a positive finite number, a fraction outside (0, 1), a
        row giving more than one of partner, p_Pa and activity.
    """
    p = Path(path)
    try:
        size = p.stat().st_size
        if p.is_file() and size > MAX_DATA_BYTES:
            raise InputError(f"data file {str(p)!r} holds {size} bytes; at most {MAX_DATA_BYTES} are accepted "
                             "(a measured data set is far smaller)")
        with open(p, newline="", encoding="utf-8") as fh:
            reader = csv.DictReader(fh)
            rows = [{(k or "").strip(): v for k, v in r.items()} for r in reader]
            header = [h.strip() for h in (reader.fieldnames or [])]
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"data file {str(p)!r} cannot be read: {getattr(exc, 'strerror', None) or exc}") from None
    except csv.Error as exc:
        raise InputError(f"data file {str(p)!r} is not a readable CSV table: {exc}") from None
    unknown = [h for h in header if h not in _KNOWN]
    if unknown:
        raise InputError(f"data file {p.name}: unknown column {unknown[0]!r}; columns: {_COLUMNS}")
    if "T_K" not in header:
        raise InputError(f"data file {p.name}: column T_K is missing (temperature, K)")
    comp = [c for c in _COMPOSITION_COLUMNS if c in header]
    if len(comp) != 1:
        raise InputError(f"data file {p.name}: give exactly one of the columns x, wt_percent, ppm (found "
                         f"{', '.join(comp) or 'none'})")
    if not rows:
        raise InputError(f"data file {p.name} has no data rows")
    col = comp[0]

    def column(name: str) -> np.ndarray:
        return np.array([_number(r, name, p.name, i) for i, r in enumerate(rows, start=2)])

    T, v = column("T_K"), column(col)
    weighted = "sigma_rel" in header
    sig = column("sigma_rel") if weighted else np.ones_like(T)
    if col == "x":
        x = v
    else:
        w = v / (100.0 if col == "wt_percent" else 1e6)
        if molar_masses is None:
            raise InputError("mass fractions need the molar masses of the host and the solute")
        ms, mh = molar_masses[solute], molar_masses[host]
        x = (w / ms) / (w / ms + (1.0 - w) / mh)
    if np.any(x >= 1.0):
        raise InputError(f"data file {p.name}: a composition is 1 or more (column {col}); give fractions below 1")
    partner = tuple((r.get("partner") or "").strip().upper() for r in rows)
    source = tuple((r.get("source") or "").strip() for r in rows)
    kind, value = [], []
    for i, r in enumerate(rows, start=2):
        given = [c for c in ("partner", "p_Pa", "activity") if (r.get(c) or "").strip()]
        if len(given) > 1:
            raise InputError(f"data file {p.name}, line {i}: give one of partner, p_Pa, activity per row (found "
                             f"{', '.join(given)})")
        k = given[0] if given and given[0] != "partner" else "solvus"
        kind.append(k)
        value.append(_number(r, k, p.name, i) if k != "solvus" else math.nan)
    return FitData(T, x, sig, partner, source, weighted, tuple(kind), np.array(value))


def _number(row: Mapping[str, str], name: str, file: str, line: int) -> float:
    text = (row.get(name) or "").strip()
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"data file {file}, line {line}: {name} = {text!r} is not a number") from None
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"data file {file}, line {line}: {name} = {text!r} must be a finite number above zero")
    return value


#: a name in a TDB expression (not a FUNCTION call with #, not a function application)
SYMBOL_RE = re.compile(r"(?<![A-Z0-9_.#])([A-Z_][A-Z0-9_]*)(?![A-Z0-9_#(])")


def free_symbols(expression: str, defined: Sequence[str]) -> list[str]:
    """Names in a TDB expression that are neither FUNCTIONs of the database (`defined`) nor T, P, R, LN, EXP, LOG."""
    names = {m.group(1) for m in SYMBOL_RE.finditer(expression.upper())}
    names -= {"T", "P", "R", "LN", "EXP", "LOG", *(d.upper() for d in defined)}
    return sorted(n for n in names if not re.fullmatch(r"[ED]\d*", n))
