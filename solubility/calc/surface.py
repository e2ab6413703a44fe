"""The surface map: which phase is stable at the surface against the solute's potential and temperature.

The metal is conserved and the solute is exchanged with the surroundings at the potential mu_X, so at each
(T, mu_X) the stable phase among the map phases P (each a (hosts)a(X,VA)c solution of the same metal, such as
ferrite, austenite, Fe4N and epsilon for nitrogen) is the one with the lowest grand potential per mole of metal,

    Omega_P(T, mu_X) = sum_i u_i mu_i^P,

the u-weighted potentials of the substitutional elements in P at its most stable constitution with that mu_X
(the u-fractions are those of the request, the same in every map phase). For a binary host this is mu_Fe of
the phase: where two phases have the same mu_Fe at the same mu_N they are in equilibrium, so each boundary is
an exact two-phase equilibrium.

At each temperature the map phases are compared on a coarse grid of ln a (only to bracket the changes of the
lowest Omega); each change is then solved exactly (Brent's method on Omega_P - Omega_Q, to 1e-12 in ln a). The
boundaries, not the grid, are the result. A phase whose window is narrower than one grid step can be missed;
a finer grid (`points`) finds it. Every other candidate (not a map phase, nor an ordered form of one, nor the
gas) is checked at the middle of each interval: a positive driving force names it in ``forms`` there.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from solubility.calc.host import DF_TOL
from solubility.calc.surroundings import GAS_PHASES, _Host

__all__ = ["QUANTITIES", "SurfaceColumn", "quantity_axis", "surface_columns"]


@dataclass(frozen=True)
class SurfaceColumn:
    """The stable phase at the surface against ln a at one temperature.

    Attributes
    ----------
    T
        K.
    lo, hi
        ln a of the ends of the mapped range.
    edges
        ln a of the boundaries, increasing (exact two-phase equilibria).
    phases
        The stable map phase in each of the len(edges) + 1 intervals ("" where no map phase has a number).
    forms
        Per interval, other candidates with a positive driving force at its middle ("+"-joined, "" none).
    """

    T: float
    lo: float
    hi: float
    edges: tuple[float, ...]
    phases: tuple[str, ...]
    forms: tuple[str, ...]


class _MapPhase:
    """Omega(T, mu_X) of one map phase: the lowest over every constitution with that mu_X.

    A phase with a miscibility gap on its interstitial sublattice (Fe4N's vacancy-rich and nitrogen-rich
    branches) has several contents with the same mu_X; the stable one is the root of lowest Omega. mu_X(s) is
    scanned once per temperature on a grid in logit(y) (every root is bracketed unless two lie within one step),
    and each bracketed root is solved by Brent's method in s = ln y.
    """

    #: the scan in t = ln(y / (1 - y)): y from about 1e-30 to 1 - 1e-9
    T_GRID = np.linspace(-69.0, 20.7, 241)

    def __init__(self, req, weights: Mapping[str, float]) -> None:
        self.req = req
        self.host = _Host(req)
        self.k = req.system.elements.index(req.solute)
        self.w = np.array([weights.get(e, 0.0) for e in req.system.elements])
        self._T = math.nan
        self._s = -np.logaddexp(0.0, -self.T_GRID)
        self._mu = np.empty(0)

    def _mu_k(self, s: float, T: float) -> float:
        return float(self.host.potentials(s, T)[self.k])

    def mu(self, target: float, T: float) -> np.ndarray | None:
        """The phase's potentials at its most stable constitution with mu_X = target (None: unreachable)."""
        if T != self._T:
            self._mu = np.array([self._mu_k(s, T) for s in self._s])
            self._T = T
        f = self._mu - target
        roots = [float(self._s[0])] if f[0] > 0 else []  # below the grid: the solute-free limit (y ~ 1e-30)
        ok = np.isfinite(f)
        for j in np.flatnonzero(ok[:-1] & ok[1:] & (np.sign(f[:-1]) != np.sign(f[1:]))):
            lo, hi = float(self._s[j]), float(self._s[j + 1])
            roots.append(lo if f[j] == 0 else hi if f[j + 1] == 0 else
                         float(brentq(lambda s: self._mu_k(s, T) - target, lo, hi, xtol=1e-14, rtol=1e-15)))
        best = None
        for s in roots:
            mu = self.host.potentials(s, T)
            if np.isfinite(mu).all() and (best is None or self.w @ mu < self.w @ best):
                best = mu
        return best

    def omega(self, target: float, T: float) -> float:
        mu = self.mu(target, T)
        return math.nan if mu is None else float(self.w @ mu)


def _others(req, names: Sequence[str]) -> tuple[str, ...]:
    from solubility.thermo.ordering import disordered_of

    db = req.database.db

    def related(p: str) -> bool:
        base = p.split("#")[0]
        return base in names or (base in db.phases and disordered_of(db, base) in names)

    return tuple(p for p in req.others if p not in GAS_PHASES and not related(p))


def surface_columns(jobs: Mapping[str, object], weights: Mapping[str, float], mu_ref: Callable[[float], float],
                    temperatures: Sequence[float], ln_a_range: Callable[[float], tuple[float, float]], *,
                    points: int = 48, progress: Callable[[float], None] | None = None) -> list[SurfaceColumn]:
    """The stable map phase against ln a at each temperature (see the module docstring).

    Parameters
    ----------
    jobs
        Map phase name -> its prepared host request (`solubility.calc.host.prepare_host`), same solute.
    weights
        Substitutional element -> u-fraction (the grand potential's weights).
    mu_ref
        T -> the solute's reference potential (J/mol); a = exp((mu_X - mu_ref) / (R T)).
    temperatures
        K.
    ln_a_range
        T -> (ln a low, ln a high) of the mapped range.
    points
        Grid points in ln a that bracket the changes (at least 8).
    progress
        Called with each temperature before it is mapped.
    """
    from solubility.constants import R

    names = tuple(jobs)
    phases = {p: _MapPhase(req, weights) for p, req in jobs.items()}
    others = {p: _others(req, names) for p, req in jobs.items()}
    columns = []
    for T in (float(t) for t in temperatures):
        if progress is not None:
            progress(T)
        lo, hi = ln_a_range(T)
        columns.append(_column(jobs, phases, others, T, mu_ref(T), R * T, lo, hi, max(int(points), 8)))
    return columns


def _column(jobs, phases, others, T, mref, RT, lo, hi, points) -> SurfaceColumn:
    from solubility.calc.host import driving_forces

    def omega(p: str, ln_a: float) -> float:
        return phases[p].omega(mref + RT * ln_a, T)

    def best(ln_a: float) -> str:
        om = {p: v for p in phases if math.isfinite(v := omega(p, ln_a))}
        return min(om, key=om.get) if om else ""

    grid = np.linspace(lo, hi, points)
    winners = [best(g) for g in grid]
    edges, labels = [], [winners[0]]
    for j in range(len(grid) - 1):
        a, b = winners[j], winners[j + 1]
        if a == b:
            continue
        if not a or not b:  # one side has no number: the boundary is where the number stops (grid-limited)
            edges.append(0.5 * (grid[j] + grid[j + 1]))
        else:
            edges.append(float(brentq(lambda x, a=a, b=b: omega(a, x) - omega(b, x), grid[j], grid[j + 1],
                                      xtol=1e-12, rtol=1e-14)))
        labels.append(b)
    forms = []
    bounds = [lo, *edges, hi]
    for i, p in enumerate(labels):
        if not p or not others[p]:
            forms.append("")
            continue
        mu = phases[p].mu(mref + RT * 0.5 * (bounds[i] + bounds[i + 1]), T)
        dfs = driving_forces(jobs[p], mu, T, phases=others[p]) if mu is not None else {}
        forms.append("+".join(q for q, d in sorted(dfs.items(), key=lambda kv: -kv[1].value) if d.value > DF_TOL))
    return SurfaceColumn(T, float(lo), float(hi), tuple(edges), tuple(labels), tuple(forms))


#: the map's potential axes: name -> (units, long name)
QUANTITIES = {"activity": ("1", "activity of {X} against {ref}"),
              "p_X2": ("Pa", "equivalent pressure of {X}2, Pa"),
              "K_N": ("atm-1/2", "nitriding potential K_N = p(NH3) / p(H2)^1.5, atm^-1/2")}


def quantity_axis(solute: str, quantity: str, mu_ref: Callable[[float], float]):
    """(to_ln_a, from_ln_a): the map quantity at T (K) to ln a of the solute against its reference and back.

    activity: ln a; p_X2 (H, N, O): a = sqrt(p / 1 bar); K_N (N): from NH3 = N + 3/2 H2 with the gas at the
    NASA standard states, K_N = p(NH3) / p(H2)^1.5 in atm^-1/2.
    """
    from solubility.constants import R
    from solubility.errors import InputError
    from solubility.thermo.gas import P0, nasa_gibbs

    allowed = ["activity"] + (["p_X2"] if solute in ("H", "N", "O") else []) + (["K_N"] if solute == "N" else [])
    if quantity not in allowed:
        raise InputError(f"map quantity {quantity!r} is not available for {solute}; give one of {', '.join(allowed)}")
    if quantity == "activity":
        return (lambda T, q: math.log(q)), (lambda T, ln_a: math.exp(ln_a))
    if quantity == "p_X2":
        return (lambda T, q: 0.5 * math.log(q / P0)), (lambda T, ln_a: P0 * math.exp(2.0 * ln_a))
    half_atm = 0.5 * math.log(101325.0 / P0)

    def shift(T: float) -> float:  # ln K_N - ln a
        return (mu_ref(T) - nasa_gibbs("NH3", T) + 1.5 * nasa_gibbs("H2", T)) / (R * T) + half_atm

    return (lambda T, q: math.log(q) - shift(T)), (lambda T, ln_a: math.exp(ln_a + shift(T)))
