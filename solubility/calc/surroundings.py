"""Uptake: the host's solute content at a chemical potential set by the surroundings.

The surroundings fix the solute's chemical potential mu_X(T) (J/mol, SER) in one of three ways:

* an activity a against a reference: mu_X = mu_ref(T) + R T ln a; the reference is the element's reference state
  (the database's graphite for C; 1/2 X2 gas at 1 bar for H, N, O; see `solubility.thermo.gas`) or a named phase
  of the database that can form from the solute alone (its Gibbs energy per mole of X at its optimum);
* a partial pressure p of the pure diatomic gas X2: mu_X = 1/2 G(X2, T, p0) + 1/2 R T ln(p / p0), p0 = 1e5 Pa;
* an atmosphere: a gas mixture whose reactions set mu_X (NH3 = N + 3/2 H2, 2 CO = C + CO2, CH4 = C + 2 H2,
  H2O = O + H2), taken as given or first equilibrated (`solubility.thermo.gas.Atmosphere`).

At each temperature the host (hosts)a(X,VA)c keeps the u-fractions of its other elements and its solute site
fraction y is solved so that the host's mu_X equals the target exactly: mu_X(s), s = ln y, is increasing, and a
safeguarded Newton iteration in s (bracketed, slope by a forward difference) gives the same relative accuracy
at y = 1e-3 and at y = 1e-15. The balance element's potential floats. Every candidate phase's driving force is
then computed at the host's potentials: none positive, the point is ``ok`` (the host is the stable phase at the
surface); otherwise ``metastable``, with the phases that would form instead named (the host keeps its number).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from solubility.calc.host import DF_TOL
from solubility.errors import InputError
from solubility.thermo.gas import P0, Atmosphere, R, atmosphere_potential, element_gas_reference

__all__ = ["Surroundings", "UptakeLine", "UptakePoint", "compute_uptake", "host_contents", "solute_potential",
           "stability_limit"]

#: searched range of the solute's site fraction (as the solvus engine)
Y_MIN, Y_MAX = 1e-30, 1.0 - 1e-9
#: phases that are the surroundings rather than a product at the surface (never named in forms_instead)
GAS_PHASES = ("GAS",)


@dataclass(frozen=True)
class Surroundings:
    """What sets the solute's potential: exactly one of an activity, a partial pressure or an atmosphere.

    Build it with `Surroundings.check`, which validates each value with a one-line error.
    """

    kind: str  # "activity", "partial_pressure" or "atmosphere"
    value: float = math.nan  # the activity (1) or the partial pressure (Pa)
    reference: str | None = None  # a phase name for an activity; None: the element's reference state
    atmosphere: Atmosphere | None = None

    @classmethod
    def check(cls, *, activity=None, reference=None, partial_pressure=None, atmosphere=None,
              equilibrate_gas: bool = False) -> Surroundings:
        given = [n for n, v in (("activity", activity), ("partial_pressure", partial_pressure),
                                ("atmosphere", atmosphere)) if v is not None]
        if len(given) != 1:
            raise InputError("give exactly one of activity, partial_pressure or atmosphere"
                             + (f" (got {', '.join(given)})" if given else ""))
        if reference is not None and activity is None:
            raise InputError("reference applies to an activity only")
        if equilibrate_gas and atmosphere is None:
            raise InputError("equilibrate_gas applies to an atmosphere only")
        if atmosphere is not None:
            return cls("atmosphere", atmosphere=Atmosphere.parse(atmosphere, equilibrate_gas))
        kind = given[0]
        raw = activity if activity is not None else partial_pressure
        what = "activity" if kind == "activity" else "partial pressure"
        accepted = "a finite number > 0" + (" (Pa)" if kind == "partial_pressure" else "")
        try:
            value = float(raw)
        except (TypeError, ValueError):
            raise InputError(f"{what} {raw!r} is not a number; give {accepted}") from None
        if not math.isfinite(value) or value <= 0:
            raise InputError(f"{what} {raw!r} is not accepted; give {accepted}")
        if reference is not None and (not isinstance(reference, str) or not reference.strip()):
            raise InputError(f"reference {reference!r} is not a phase name")
        return cls(kind, value, reference.strip().upper() if reference else None)


@dataclass
class _Potential:
    """mu_X(T) of the surroundings, with the element reference used for the reported activity."""

    surroundings: Surroundings
    solute: str
    ref_gibbs: object  # T -> mu_ref(T), J/mol
    ref_text: str
    gas_source: str
    derived_name: str = ""
    reaction: str = ""

    def __call__(self, T: float) -> tuple[float, float, float]:
        """(mu_X in J/mol, activity against the reference, the trade's derived quantity or nan)."""
        sur = self.surroundings
        mu_ref = self.ref_gibbs(T)
        derived = math.nan
        if sur.kind == "activity":
            mu = mu_ref + R * T * math.log(sur.value)
        elif sur.kind == "partial_pressure":
            mu = self._gas.gibbs(T) + 0.5 * R * T * math.log(sur.value / P0)
        else:
            mu, derived, self.derived_name, self.reaction = atmosphere_potential(sur.atmosphere, self.solute, T)
        activity = math.exp((mu - mu_ref) / (R * T))
        if sur.kind == "atmosphere" and self.solute == "C":
            derived = activity
        return mu, activity, derived

    _gas: object = None


def _phase_reference(ldb, phase: str, solute: str, pressure: float):
    """T -> Gibbs energy per mole of X of `phase` formed from the solute alone, at its optimum constitution."""
    from solubility.thermo.cache import compiled_system
    from solubility.thermo.system import filter_candidate_phases

    if phase not in filter_candidate_phases(ldb.db, [solute]):
        raise InputError(f"reference phase {phase} cannot form from {solute} alone; give a phase of pure {solute}")
    key = None if ldb.sha256 is None else f"sha256:{ldb.sha256}"
    system = compiled_system(ldb.db, [solute], [phase], key=key).bind(pressure, {})
    zero = np.zeros(1)

    def gibbs(T: float) -> float:
        y0 = system.screen(zero, T, [phase])[phase][1]
        return -system.driving_force(phase, zero, T, y0).value  # DF at mu = 0 is -min G per atom

    return gibbs


def solute_potential(ldb, solute: str, surroundings: Surroundings, pressure: float) -> _Potential:
    """The surroundings' mu_X(T) for `solute` on the loaded database `ldb` (see the module docstring)."""
    from solubility.databases.reader import check_phases

    gas = None
    if solute in ("H", "N", "O"):
        gas = element_gas_reference(ldb.db, solute)
        ref_gibbs, ref_text, source = gas.gibbs, f"1/2 {solute}2 gas at 1 bar", gas.description
    else:
        if surroundings.kind == "partial_pressure":
            raise InputError(f"{solute} has no diatomic gas; a partial pressure is accepted for H, N and O")
        ref_phase = (ldb.db.refstates.get(solute) or {}).get("phase", "")
        if ref_phase not in ldb.db.phases and surroundings.reference is None:
            raise InputError(f"the database's reference state of {solute} ({ref_phase or 'none'}) is not one of its "
                             "phases; name a reference phase")
        ref_gibbs, ref_text = _phase_reference(ldb, ref_phase, solute, pressure), ref_phase
        source = f"database phase {ref_phase} (reference state)"
    if surroundings.reference is not None:
        (phase,) = check_phases(ldb, [surroundings.reference])
        ref_gibbs, ref_text = _phase_reference(ldb, phase, solute, pressure), phase
        if surroundings.kind == "activity" and gas is None:
            source = f"database phase {phase} (named reference)"
    if surroundings.kind == "atmosphere":
        source = "NASA polynomials (McBride, Gordon and Reno, NASA TM-4513, 1993) bundled with Cantera"
    pot = _Potential(surroundings, solute, ref_gibbs, ref_text, source)
    pot._gas = gas
    if surroundings.kind == "atmosphere":
        _, pot.derived_name, pot.reaction = surroundings.atmosphere.reaction(solute)
    return pot


# ---------------------------------------------------------------------- host access (the core primitives)
def _open_host(database, phase, solute, *, exclude, fix, pressure, balance):
    """Validate the host request and bind its compiled system (`solubility.calc.host.HostRequest`)."""
    from solubility.calc.host import prepare_host

    return prepare_host(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance,
                        need_partner=False)


class _Host:
    """The host's potentials at ln y and every other candidate's driving force at given potentials."""

    def __init__(self, req) -> None:
        self._req = req
        self.checked = tuple(p for p in req.others if p not in GAS_PHASES)
        self.skipped = tuple(p for p in req.others if p in GAS_PHASES)

    def potentials(self, s: float, T: float) -> np.ndarray:
        from solubility.calc.host import host_potentials

        return host_potentials(self._req, s, T)[0]

    def forces(self, mu: np.ndarray, T: float, hints: Mapping[str, np.ndarray] | None) -> dict:
        """{phase: (driving force J/mol of atoms, y, converged)} of every candidate but the host (and the gas)."""
        from solubility.calc.host import driving_forces

        dfs = driving_forces(self._req, mu, T, hints=hints, phases=self.checked)
        return {p: (d.value, d.y, d.converged) for p, d in dfs.items()}


# ---------------------------------------------------------------------- the engine
@dataclass(frozen=True)
class UptakePoint:
    """The host at one temperature in the given surroundings.

    Attributes
    ----------
    T
        K.
    s
        ln of the solute's site fraction in the host (nan without a number).
    mu
        Host's chemical potentials, J/mol (system's element order).
    mu_target
        The surroundings' solute potential, J/mol.
    activity
        The solute's activity against the reference.
    derived
        The trade's quantity of an atmosphere (nitriding potential, carbon activity, ...), else nan.
    status
        ok, metastable, below_limit or failed.
    reason
        Why there is no number, or which phase forms instead; "" when ok.
    forms_instead
        Phases with a positive driving force at the host's potentials, most stable first.
    max_df
        Largest driving force of another candidate, J/mol of atoms.
    """

    T: float
    s: float
    mu: np.ndarray
    mu_target: float
    activity: float
    derived: float
    status: str
    reason: str = ""
    forms_instead: tuple[str, ...] = ()
    max_df: float = math.nan
    phase_y: Mapping[str, np.ndarray] = field(default_factory=dict, repr=False)

    @property
    def has_number(self) -> bool:
        return self.status in ("ok", "metastable")


@dataclass(frozen=True)
class UptakeLine:
    points: tuple[UptakePoint, ...]
    host: object  # HostModel
    elements: tuple[str, ...]
    molar_masses: np.ndarray
    candidates: tuple[str, ...]
    host_moles: np.ndarray
    potential: _Potential
    not_checked: tuple[str, ...] = ()


def _solve_s(host: _Host, k: int, target: float, T: float, s0: float) -> tuple[float | None, str]:
    """s with mu_k(s) = target by bracketed Newton in s; (None, reason) when there is none in the range."""
    lo_s, hi_s = math.log(Y_MIN), math.log(Y_MAX)
    lo = hi = None
    s = min(max(s0, lo_s), hi_s)
    for _ in range(100):
        mu = host.potentials(s, T)
        f = float(mu[k]) - target
        if not math.isfinite(f):
            return None, f"host potential is not finite at ln y = {s:.6g}"
        if f == 0.0:
            return s, ""
        if f < 0:
            lo = s
        else:
            hi = s
        h = -1e-6 if s + 1e-6 > hi_s else 1e-6
        slope = (float(host.potentials(s + h, T)[k]) - float(mu[k])) / h
        step = -f / slope if slope > 0 else (5.0 if f < 0 else -5.0)
        s_new = s + max(-10.0, min(10.0, step))
        if lo is not None and hi is not None and not lo < s_new < hi:
            s_new = 0.5 * (lo + hi)
        s_new = min(max(s_new, lo_s), hi_s)
        if s_new == s:
            if s == lo_s and f > 0:
                return None, "below_limit"
            if s == hi_s and f < 0:
                return None, "the host's interstitial sublattice fills before it reaches the potential"
        if abs(s_new - s) < 1e-13 or (lo is not None and hi is not None and hi - lo < 1e-13):
            return s_new, ""
        s = s_new
    return None, "the potential solve did not converge"


def compute_uptake(job, potential: _Potential, temperatures: Sequence[float], *, progress=None) -> UptakeLine:
    """The uptake at each temperature (K, any order; the result keeps it) on a prepared host `job`.

    `progress`, if given, is called with each temperature before it is solved (it may raise to stop the line).
    """
    host = _Host(job)
    k = job.system.elements.index(job.solute)
    T_all = np.asarray(temperatures, dtype=float)
    points: list[UptakePoint | None] = [None] * T_all.size
    prev: UptakePoint | None = None
    for i in np.argsort(T_all, kind="stable"):
        T = float(T_all[i])
        if progress is not None:
            progress(T)
        nan_mu = np.full(len(job.system.elements), np.nan)
        try:
            target, activity, derived = potential(T)
            s0 = prev.s if prev is not None and prev.has_number else math.log(1e-6)
            s, why = _solve_s(host, k, target, T, s0)
            if s is None:
                status = "below_limit" if why == "below_limit" else "failed"
                reason = (f"{job.solute} content of {job.phase} is below the searched site fraction {Y_MIN:g}"
                          if status == "below_limit" else why)
                point = UptakePoint(T, math.nan, nan_mu, target, activity, derived, status, reason)
            else:
                point = _check(host, job, T, s, target, activity, derived, prev)
        except (ArithmeticError, ValueError, np.linalg.LinAlgError, RuntimeError) as exc:
            if isinstance(exc, InputError):
                raise
            point = UptakePoint(T, math.nan, nan_mu, math.nan, math.nan, math.nan, "failed", f"solver failed: {exc}")
        points[int(i)] = point
        prev = point if point.has_number else prev
    sysm = job.system
    return UptakeLine(tuple(points), job.host, tuple(sysm.elements), np.asarray(sysm.molar_masses),
                      tuple(job.candidates), sysm.phases[job.phase].moles, potential, host.skipped)


def host_contents(job, potential: _Potential, temperatures: Sequence[float],
                  start: Sequence[float] | None = None) -> np.ndarray:
    """ln y of the solute in the host at the surroundings' potential, without the check of other phases.

    The solve of `compute_uptake` alone (the forward model of a fit): nan where there is no solution in the
    searched range. `start` gives ln y to start each solve from (a previous solution); default ln 1e-6.
    """
    host = _Host(job)
    k = job.system.elements.index(job.solute)
    T_all = np.asarray(temperatures, dtype=float)
    out = np.full(T_all.size, np.nan)
    for i, T in enumerate(T_all):
        s0 = math.log(1e-6) if start is None or not math.isfinite(start[i]) else float(start[i])
        s, _ = _solve_s(host, k, potential(float(T))[0], float(T), s0)
        out[i] = math.nan if s is None else s
    return out


def _check(host: _Host, job, T, s, target, activity, derived, prev) -> UptakePoint:
    mu = host.potentials(s, T)
    dfs = host.forces(mu, T, prev.phase_y if prev is not None else None)
    phase_y = {p: y for p, (_, y, _) in dfs.items()}
    max_df = max((v for v, _, _ in dfs.values()), default=-math.inf)
    unconverged = [p for p, (v, _, ok) in dfs.items() if not ok and v > -1.0]
    forms = tuple(sorted((p for p, (v, _, _) in dfs.items() if v > DF_TOL), key=lambda p: -dfs[p][0]))
    if unconverged:
        return UptakePoint(T, math.nan, mu, target, activity, derived, "failed",
                           f"driving force of {', '.join(unconverged)} did not converge", (), max_df, phase_y)
    if forms:
        text = ", ".join(f"{p} ({dfs[p][0]:+.4g} J/mol of atoms)" for p in forms)
        return UptakePoint(T, s, mu, target, activity, derived, "metastable",
                           f"{job.phase} is metastable here: {text} forms instead", forms, max_df, phase_y)
    return UptakePoint(T, s, mu, target, activity, derived, "ok", "", (), max_df, phase_y)


def stability_limit(job, temperatures: Sequence[float]):
    """The surface map's exact boundary: the highest solute potential at which the host is the stable phase.

    That potential is the host's own solvus (the smallest content at which another phase has zero driving force),
    solved exactly by `solubility.calc.boundary.solvus_line`; here it is expressed as the solute's activity against
    its reference and, for a gas element, as the equivalent pressure of X2 (Pa) and, for N, as the nitriding
    potential K_N (atm^-1/2).

    Returns
    -------
    line, activity, p_x2, k_n
        The SolvusLine and three arrays over `temperatures` (nan where the host has no boundary).
    """
    from solubility.calc.boundary import solvus_line
    from solubility.thermo.gas import nasa_gibbs

    line = solvus_line(job, temperatures)
    pot = solute_potential(job.database, job.solute, Surroundings("activity", 1.0), job.pressure)
    k = job.system.elements.index(job.solute)
    n = len(line.points)
    activity, p_x2, k_n = np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan)
    for i, p in enumerate(line.points):
        if not p.valid:
            continue
        mu = float(p.mu[k])
        activity[i] = math.exp((mu - pot.ref_gibbs(p.T)) / (R * p.T))
        if job.solute in ("H", "N", "O"):
            p_x2[i] = P0 * activity[i] ** 2
        if job.solute == "N":
            ln_q = (mu - nasa_gibbs("NH3", p.T) + 1.5 * nasa_gibbs("H2", p.T)) / (R * p.T)
            k_n[i] = math.exp(ln_q) * math.sqrt(101325.0 / P0)
    return line, activity, p_x2, k_n
