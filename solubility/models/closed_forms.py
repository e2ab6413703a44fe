"""Closed forms of the ideal two-sublattice interstitial solution ``(M)a (X,VA)c`` (numpy; sympy in `formulas`).

* atoms per formula unit ``N = a + c y``; mole fraction of X for a pure host ``x = c y / (a + c y)``;
* configurational entropy ``S = -R [a sum y_M ln y_M + c (y ln y + (1-y) ln(1-y))]`` per mole of formula
  units, ``S / N`` per mole of atoms;
* chemical potentials (``mu_VA = 0``), with ``G(M:X) = G(M:VA) + c G_X + dG`` and ``dG = A + B T``:
  ``mu_X = G_X + dG / c + R T ln(y / (1 - y))`` and ``a mu_M = G(M:VA) + c R T ln(1 - y)``;
* against a partner ``M_p X_q`` with Gibbs energy of formation ``dGf`` (J per mole of partner formula units,
  relative to ``(p/a) G(M:VA) + q G_X``), equilibrium ``p mu_M + q mu_X = G_partner`` gives, exactly,
  ``q ln y + (p c / a - q) ln(1 - y) = (dGf - q dG / c) / (R T)``.
  For a pure-solute partner (p = 0, q = 1, dGf = Delta, the partner's Gibbs energy relative to the reference
  G_X) this is ``y / (1 - y) = exp(-(dG - c Delta) / (c R T))``, exact for the ideal model at any y; the
  Henry-law (dilute) limit is ``y = exp((dGf / q - dG / c) / (R T))`` for any partner.

No pycalphad, xarray or matplotlib; sympy is imported only by `formulas`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from solubility.constants import R
from solubility.errors import InputError

__all__ = [
    "GAS_CONSTANT",
    "DiluteSolubility",
    "dilute_solubility",
    "formulas",
    "ideal_entropy",
    "x_from_y",
    "y_from_x",
]

#: machine precision (the 2018 CODATA value is 8.314462618; the difference is 6e-6 relative).
GAS_CONSTANT = R


def _positive(value: float, what: str) -> float:
    v = float(value)
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"{what} = {value!r} must be a finite number greater than zero")
    return v


def x_from_y(y: Any, a: float, c: float) -> Any:
    """Mole fraction of the interstitial in a pure host from its site fraction: ``x = c y / (a + c y)``.

    Parameters
    ----------
    y
        Site fraction of X on the interstitial sublattice, in [0, 1] (scalar or array).
    a, c
        Site ratios (host, interstitial).
    """
    a, c = _positive(a, "a"), _positive(c, "c")
    yy = np.asarray(y, dtype=float)
    if np.any(~np.isfinite(yy)) or np.any((yy < 0) | (yy > 1)):
        raise InputError("site fraction y must be within [0, 1]")
    out = c * yy / (a + c * yy)
    return float(out) if out.ndim == 0 else out


def y_from_x(x: Any, a: float, c: float) -> Any:
    """Site fraction from the mole fraction in a pure host: ``y = a x / (c (1 - x))``.

    Raises
    ------
    InputError
        x outside [0, c / (a + c)] (the filled end-member), where no site fraction gives it.
    """
    a, c = _positive(a, "a"), _positive(c, "c")
    xx = np.asarray(x, dtype=float)
    x_max = c / (a + c)
    if np.any(~np.isfinite(xx)) or np.any((xx < 0) | (xx > x_max * (1 + 1e-12))):
        raise InputError(
            f"mole fraction x must be within [0, {x_max:.6g}] (c / (a + c), the filled end-member)"
        )
    out = np.minimum(a * xx / (c * (1.0 - xx)), 1.0)
    return float(out) if out.ndim == 0 else out


def _xlogx(v: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(v > 0, v * np.log(np.where(v > 0, v, 1.0)), 0.0)


def ideal_entropy(
    y: Any, a: float, c: float, *, host_fractions: Sequence[float] | None = None
) -> tuple[Any, Any]:
    """Ideal configurational entropy of ``(M...)a (X,VA)c``.

    Parameters
    ----------
    y
        Site fraction of X on the interstitial sublattice (scalar or array), in [0, 1].
    a, c
        Site ratios.
    host_fractions
        Site fractions of the host species on the first sublattice (sum 1); one host (no mixing) when None.

    Returns
    -------
    (per_formula_unit, per_atom)
        J/(mol K), per mole of formula units and per mole of atoms (``a + c y`` atoms per formula unit;
        vacancies are not atoms).
    """
    a, c = _positive(a, "a"), _positive(c, "c")
    yy = np.asarray(y, dtype=float)
    if np.any(~np.isfinite(yy)) or np.any((yy < 0) | (yy > 1)):
        raise InputError("site fraction y must be within [0, 1]")
    host_term = 0.0
    if host_fractions is not None:
        h = np.asarray(host_fractions, dtype=float)
        if h.ndim != 1 or np.any(h < 0) or abs(h.sum() - 1.0) > 1e-9:
            raise InputError(f"host_fractions {list(h)} must be non-negative and sum to 1")
        host_term = float(_xlogx(h).sum())
    s_fu = -GAS_CONSTANT * (a * host_term + c * (_xlogx(yy) + _xlogx(1.0 - yy)))
    s_atom = s_fu / (a + c * yy)
    if np.ndim(s_fu) == 0:
        return float(s_fu), float(s_atom)
    return s_fu, s_atom


@dataclass(frozen=True)
class DiluteSolubility:
    """Solubility of X in ``(M)a (X,VA)c`` against a partner phase (ideal interstitial solution).

    Attributes
    ----------
    y, x
        Exact ideal site fraction and mole fraction (NaN where the partner is not stable against the
        solution).
    y_henry, x_henry
        Henry-law (dilute) limit ``y = exp((dGf / q - dG / c) / (R T))``, and its x.
    temperature
        K.
    """

    y: Any
    x: Any
    y_henry: Any
    x_henry: Any
    temperature: Any


def dilute_solubility(
    temperature: Any,
    A: float,
    B: float = 0.0,
    *,
    a: float = 1.0,
    c: float = 1.0,
    partner_host: float = 0.0,
    partner_solute: float = 1.0,
    partner_A: float = 0.0,
    partner_B: float = 0.0,
) -> DiluteSolubility:
    """Solubility of X in an ideal interstitial solution ``(M)a (X,VA)c`` in equilibrium with a partner.

    The end-member energy is ``dG = A + B T`` (J per mole of formula units), relative to ``G(M:VA) + c G_X``
    with G_X the reference state of X. The partner is ``M_p X_q`` (``partner_host`` = p, ``partner_solute`` =
    q; p = 0 for a pure-solute partner) with Gibbs energy of formation ``dGf = partner_A + partner_B T`` (J
    per mole of partner formula units) relative to ``(p / a) G(M:VA) + q G_X``. The exact ideal solubility
    solves

        q ln y + (p c / a - q) ln(1 - y) = (dGf - q dG / c) / (R T)

    on the branch ``y < q a / (p c)`` (the partner richer in X than the solution); for p = 0 it is
    ``y / (1 - y) = exp(-(dG - c dGf / q) / (c R T))``. Derivation: `formulas` (module docstring).

    Parameters
    ----------
    temperature
        K, scalar or array (> 0).

    Returns
    -------
    DiluteSolubility
    """
    from scipy.optimize import brentq

    T = np.atleast_1d(np.asarray(temperature, dtype=float))
    if np.any(~np.isfinite(T)) or np.any(T <= 0):
        raise InputError("temperature must be finite and greater than zero (K)")
    a, c = _positive(a, "a"), _positive(c, "c")
    q = _positive(partner_solute, "partner_solute (q, solute atoms per partner formula unit)")
    p = float(partner_host)
    if not math.isfinite(p) or p < 0:
        raise InputError(
            f"partner_host = {partner_host!r} must be >= 0 (host atoms per partner formula unit)"
        )
    rhs = (partner_A + partner_B * T - q * (A + B * T) / c) / (GAS_CONSTANT * T)
    y_henry = np.exp(np.minimum(rhs / q, 700.0))
    k = p * c / a - q
    y = np.full_like(T, np.nan)
    for i, r in enumerate(rhs):
        y[i] = _solve_branch(float(r), q, k, brentq)
    scalar = np.ndim(temperature) == 0
    x = c * y / (a + c * y)
    x_h = np.where(y_henry <= 1, c * np.minimum(y_henry, 1) / (a + c * np.minimum(y_henry, 1)), np.nan)

    def out(v: np.ndarray) -> Any:
        return float(v[0]) if scalar else v

    return DiluteSolubility(out(y), out(x), out(y_henry), out(x_h), out(T))


def _solve_branch(rhs: float, q: float, k: float, brentq: Any) -> float:
    """Root of ``q ln y + k ln(1 - y) = rhs`` on the physical branch (see `dilute_solubility`)."""
    if k <= 0:  # monotonic in y on (0, 1)
        if k == 0 and rhs >= 0:
            return float("nan")
        # in terms of u = ln(y/(1-y)) for k = -q this is exact and avoids cancellation near y = 1
        if k == -q:
            return float(1.0 / (1.0 + math.exp(-rhs / q))) if rhs / q > -700 else float(math.exp(rhs / q))
        hi = 1.0 - 1e-16
    else:
        hi = q / (q + k)  # the maximum of the left side
        top = q * math.log(hi) + k * math.log1p(-hi)
        if rhs > top:
            return float("nan")
        if rhs == top:
            return hi

    def f(lny: float) -> float:
        yv = math.exp(lny)
        return q * lny + k * math.log1p(-yv) - rhs

    lo = min(rhs / q - 50.0, -1.0)
    ln_hi = math.log(hi)
    if f(ln_hi) < 0:
        return float("nan")
    return float(math.exp(brentq(f, lo, ln_hi, xtol=1e-15, rtol=1e-15, maxiter=500)))


def formulas() -> dict[str, Any]:
    """The closed forms as sympy expressions (symbols ``y x a c T R A B p q dGf G_MVA G_X``).

    Keys: ``x_of_y``, ``y_of_x``, ``G`` (Gibbs energy per formula unit of the ideal model), ``S_fu``,
    ``S_atom``,
    ``mu_X``, ``mu_M`` (from the derivatives of G; ``mu_VA = 0``), ``equilibrium`` (left minus right side of
    ``p mu_M + q mu_X = G_partner``, zero at the solvus), ``y_pure_solute`` (exact for p = 0) and ``y_henry``.
    """
    import sympy as sp

    y, x, a, c, T, R, A, B, p, q, dGf, G_MVA, G_X = sp.symbols(
        "y x a c T R A B p q dGf G_MVA G_X", positive=True
    )
    dG = A + B * T
    G = y * (G_MVA + c * G_X + dG) + (1 - y) * G_MVA + c * R * T * (y * sp.log(y) + (1 - y) * sp.log(1 - y))
    # mu_X: adding dy of X on c sites adds c dy moles of X at fixed M, so c mu_X = dG/dy (mu_VA = 0)
    mu_X = sp.simplify(sp.diff(G, y) / c)
    # a mu_M = G - c y mu_X (Euler's relation for one formula unit)
    mu_M = sp.simplify((G - c * y * mu_X) / a)
    G_partner = p * G_MVA / a + q * G_X + dGf
    equilibrium = sp.expand_log(sp.simplify(p * mu_M + q * mu_X - G_partner), force=True)
    S_fu = -c * R * (y * sp.log(y) + (1 - y) * sp.log(1 - y))
    return {
        "x_of_y": c * y / (a + c * y),
        "y_of_x": a * x / (c * (1 - x)),
        "G": G,
        "S_fu": S_fu,
        "S_atom": S_fu / (a + c * y),
        "mu_X": mu_X,
        "mu_M": mu_M,
        "equilibrium": equilibrium,
        "y_pure_solute": 1 / (1 + sp.exp((dG - c * dGf) / (c * R * T))),
        "y_henry": sp.exp((dGf / q - dG / c) / (R * T)),
    }
