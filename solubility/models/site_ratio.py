"""Re-express an interstitial phase ``(M)a (X,VA)c`` with another site ratio c', keeping its dilute solubility.

Changing c changes the meaning of every parameter that holds X. With the same mole fraction x the site fractions
obey ``c y = c' y'``; writing ``F(y)`` for the Gibbs energy per formula unit less the reference and ideal terms,
``mu_X = [G(M:X) - G(M:VA) + F'(y)] / c + R T ln(y / (1 - y))``. Matching mu_X(x) of both descriptions, order by
order in x, with r = c'/c (derivation in the README section on site choices):

* magnetic parameters map exactly at every x: ``TC'(M:X) = TC(M:VA) + r (TC(M:X) - TC(M:VA))``, BMAGN alike
  (the atoms per formula unit ``a + c y`` and the Curie temperature are then the same functions of x);
* order x^0 (the Henry constant):
  ``G'(M:X) = G(M:VA) + r (G(M:X) - G(M:VA) + S1) - L'0 + c' R T ln r``, ``S1 = sum_k (-1)^k L_k``;
* order x^1 (the first correction): one interaction
  ``L'0 = r^2 sum_k (-1)^k (1 + 2 k) L_k - r (c' - c) R T / 2``, replacing the L_k of ``(M:X,VA)``.

So the solubility of the converted phase differs only at order x^2 in the relative sense (below 1e-9 at
x < 1e-5 for the usual sizes of L). Without interactions and with c' = c the conversion is the identity; in the
ideal dilute limit the site count only shifts G(M:X) by the temperature-linear term ``c' R T ln r`` (plus the
scaling r of the end-member energy, which follows from counting it per formula unit). How far the concentrated
behaviour moves is measured by `concentrated_shift`. Pure text and numpy: no pycalphad.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass

from solubility.errors import DatabaseError, InputError
from solubility.models.closed_forms import GAS_CONSTANT
from solubility.models.tdb_commands import parse_ranges, range_text
from solubility.models.tdb_text import evaluate_constant

__all__ = ["SiteRatioConversion", "concentrated_shift", "convert_site_ratio"]

_KEY_RE = re.compile(r"^([A-Z]+)\(([A-Z0-9_#]+),([^:;]+):([^;]+);(\d+)\)$")


@dataclass(frozen=True)
class SiteRatioConversion:
    """The parameters of a phase re-expressed with site ratio ``c_new``.

    Attributes
    ----------
    parameters
        ``{key: TDB range text}``, every parameter of the phase (host-only ones unchanged).
    c_old, c_new
        Site ratios of the interstitial sublattice before and after.
    interactions
        ``{k: range text}`` of the original ``L(M:X,VA;k)`` (used by `concentrated_shift`).
    """

    parameters: dict[str, str]
    c_old: float
    c_new: float
    a: float
    interactions: dict[int, str]


def _key(key: str) -> tuple[str, str, str, str, int]:
    m = _KEY_RE.match(key.replace(" ", "").upper())
    if not m:
        raise InputError(f"parameter {key!r} is not of the form G(PHASE,M:X;0) with two sublattices")
    return m.group(1), m.group(2), m.group(3), m.group(4), int(m.group(5))


def linear_combination(terms: list[tuple[float, str]], t_coefficient: float = 0.0) -> str:
    """TDB range text of ``sum coef * expr + t_coefficient * T`` over the common temperature range of the terms."""
    pieces = [parse_ranges(text) for _, text in terms]
    low = max(p[0][0] for p in pieces)
    high = min(p[-1][2] for p in pieces)
    if not low < high:
        raise InputError("the parameters to combine have no temperature range in common")
    cuts = sorted({low, high, *(b for p in pieces for (_, _, b) in p if low < b < high)})
    out = []
    for t0, t1 in itertools.pairwise(cuts):
        mid = 0.5 * (t0 + t1)
        parts = []
        for (coef, _), piece in zip(terms, pieces, strict=True):
            expr = next(e for (lo, e, hi) in piece if lo <= mid < hi)
            if coef != 0.0:
                parts.append(f"{coef!r}*({expr})")
        if t_coefficient != 0.0:
            parts.append(f"{t_coefficient!r}*T")
        out.append((t0, "+".join(parts) or "0", t1))
    return range_text(out).replace("+-", "-")


def convert_site_ratio(
    parameters: Mapping[str, str], *, host: str, solute: str, a: float, c_old: float, c_new: float
) -> SiteRatioConversion:
    """Re-express the parameters of ``(host)a (solute,VA)c_old`` for the site ratio `c_new` (module docstring).

    Parameters
    ----------
    parameters
        ``{"G(PHASE,FE:C;0)": TDB range text}``: every parameter of the phase (as `tdb_commands.parameters_of`).
    host, solute
        The host element M and the interstitial X.
    a, c_old, c_new
        Site ratios (host; interstitial before and after).

    Raises
    ------
    InputError
        A parameter the conversion cannot carry exactly: one holding X other than G(M:X), TC(M:X), BMAGN(M:X)
        and G(M:X,VA;k); an end-member G(M:VA) or G(M:X) missing.
    """
    r = c_new / c_old
    keep: dict[str, str] = {}
    by: dict[tuple[str, str], str] = {}
    inter: dict[int, str] = {}
    phase = ""
    for key, text in parameters.items():
        ptype, phase, first, second, order = _key(key)
        if first != host:
            raise InputError(f"parameter {key!r}: only the host {host} on the first sublattice is converted")
        species = set(second.split(","))
        if solute not in species:
            keep[key] = text
        elif ptype == "G" and second == solute and order == 0:
            by[("G", "X")] = text
        elif ptype == "G" and species == {solute, "VA"}:
            inter[order] = text
        elif ptype in ("TC", "BMAGN") and second == solute and order == 0:
            by[(ptype, "X")] = text
        else:
            raise InputError(f"parameter {key!r} cannot be converted exactly; only G(M:X), TC(M:X), BMAGN(M:X) "
                             "and the interactions G(M:X,VA;k) are")
    va = {ptype: parameters[k] for k in parameters for ptype in ("G", "TC", "BMAGN")
          if _key(k)[0] == ptype and _key(k)[3] == "VA"}
    if "G" not in va or ("G", "X") not in by:
        raise InputError(f"phase {phase}: G({host}:VA) and G({host}:{solute}) are needed to convert the site ratio")
    out = dict(keep)
    rgas = GAS_CONSTANT
    terms = [(1.0 - r, va["G"]), (r, by[("G", "X")])]
    terms += [(r * (-1) ** k - r * r * (-1) ** k * (1 + 2 * k), text) for k, text in sorted(inter.items())]
    t_coef = r * (c_new - c_old) * rgas / 2.0 + c_new * rgas * math.log(r)
    out[f"G({phase},{host}:{solute};0)"] = linear_combination(terms, t_coef)
    l0_terms = [(r * r * (-1) ** k * (1 + 2 * k), text) for k, text in sorted(inter.items())]
    l0_t = -r * (c_new - c_old) * rgas / 2.0
    if l0_terms or l0_t != 0.0:
        out[f"G({phase},{host}:{solute},VA;0)"] = linear_combination(l0_terms or [(0.0, "298.15 0; 6000 N")], l0_t)
    for ptype in ("TC", "BMAGN"):
        if (ptype, "X") in by:
            base = va.get(ptype, "298.15 0; 6000 N")
            out[f"{ptype}({phase},{host}:{solute};0)"] = linear_combination([(1.0 - r, base), (r, by[(ptype, "X")])])
    return SiteRatioConversion(out, float(c_old), float(c_new), float(a), dict(inter))


def _mu_excess(x: float, T: float, a: float, c: float, lk: Mapping[int, float]) -> float:
    """mu_X less R T ln x and constants: ideal and Redlich-Kister parts, J/mol (pure host)."""
    y = a * x / (c * (1.0 - x))
    d = sum(v * ((2 * y - 1) ** k * (1 - 2 * y) + (y - y * y) * 2 * k * (2 * y - 1) ** (k - 1) if k else 1 - 2 * y)
            for k, v in lk.items())
    return GAS_CONSTANT * T * (math.log(y / (1 - y)) - math.log(x)) + d / c


def concentrated_shift(conv: SiteRatioConversion, temperature: float, x: float) -> float | None:
    """How far the converted phase moves from the original at mole fraction x: the change of mu_X, J/mol.

    Zero to order x (the construction); the magnetic part maps exactly and is left out. A fixed-potential
    partner's solubility at that content moves by about ``-shift / (R T)`` in ln x. None when an interaction names
    a FUNCTION (its value is not known here).
    """
    old, new = {}, {}
    try:
        for k, text in conv.interactions.items():
            old[k] = _value(text, temperature)
        key = next((k for k in conv.parameters if k.endswith(",VA;0)") and k.startswith("G(")), None)
        if key is not None:
            new[0] = _value(conv.parameters[key], temperature)
    except (DatabaseError, TypeError):
        return None
    if any(v is None for v in (*old.values(), *new.values())):
        return None

    def g(c: float, lk: Mapping[int, float], xx: float) -> float:
        return _mu_excess(xx, temperature, conv.a, c, lk)

    tiny = 1e-12
    d_new = g(conv.c_new, new, x) - g(conv.c_new, new, tiny)
    d_old = g(conv.c_old, old, x) - g(conv.c_old, old, tiny)
    return float(d_new - d_old)


def _value(text: str, temperature: float) -> float | None:
    piece = next((e for lo, e, hi in parse_ranges(text) if lo <= temperature < hi), None)
    return None if piece is None else evaluate_constant(piece, temperature)
