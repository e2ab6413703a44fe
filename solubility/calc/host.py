"""The host layer: a validated host request and the two primitives every calculation on it is built from.

A host is a phase (hosts)a(X,VA)c held at fixed contents of its substitutional elements (u-fractions), whose
only free variable is s = ln(y_X), the log of the solute's site fraction on the interstitial sublattice.

* `prepare_host` validates a request (`solubility.calc.inputs`) and binds the compiled system it needs (from the
  cache; pressure and free parameter values are given at evaluation time, never compiled in).
* `host_potentials` gives the chemical potentials of the elements in the host at ln(y) = s.
* `driving_forces` gives every other candidate phase's driving force against given potentials, with its optimal
  constitution.

The solvus (`solubility.calc.boundary`) is built on these; so are uptake at fixed activity and fitting.
Conventions: K, Pa, J/mol; driving forces in J per mole of atoms, > 0 where the phase is more stable than the
state that set the potentials.
"""

from __future__ import annotations

import dataclasses
import math
import types
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from solubility.errors import DatabaseWarning, InputError
from solubility.thermo.phases import DrivingForce

__all__ = [
    "DF_TOL",
    "REFINE_MARGIN",
    "HostModel",
    "HostRequest",
    "driving_forces",
    "host_model",
    "host_potentials",
    "prepare_host",
]

#: a driving force within this of zero (J per mole of atoms) counts as zero (double precision noise of
#: Gibbs energies of order 1e5 J/mol is about 1e-7 J/mol)
DF_TOL = 1e-4
#: phases whose sampled driving force is below -REFINE_MARGIN (J/mol of atoms) are not refined. The sample's
#: shortfall (refined minus sampled driving force) is of order 10 J/mol for the smooth CALPHAD functions; a
#: caller that keeps its margins (the solvus engine) widens a phase's margin to 20 times the largest shortfall
#: seen for that phase
REFINE_MARGIN = 1000.0


@dataclass(frozen=True)
class HostModel:
    """The host phase's constitution as a function of one number, s = ln(y_solute).

    Attributes
    ----------
    phase
        Host phase name.
    solute
        Interstitial solute element.
    base_y
        Site fractions with the solute's and VA's entries still to be set (substitutional ones fixed).
    solute_index, vacancy_index
        Indices of the solute and of VA among the host's site-fraction variables.
    a, c
        Substitutional and interstitial site ratios (moles of sites per formula unit).
    """

    phase: str
    solute: str
    base_y: np.ndarray
    solute_index: int
    vacancy_index: int
    a: float
    c: float

    def y(self, s: float) -> np.ndarray:
        """Site fractions for ln(y_solute) = s (s <= 0)."""
        y = self.base_y.copy()
        y[self.solute_index] = math.exp(s)
        y[self.vacancy_index] = -math.expm1(s)
        return y


@dataclass(frozen=True)
class HostRequest:
    """A validated host request with its bound compiled system.

    Attributes
    ----------
    database
        The `solubility.databases.reader.LoadedDatabase`.
    phase, solute, balance
        Host phase, interstitial solute and the substitutional balance element.
    fix
        ((element, u-fraction), ...) of the other substitutional elements, sorted.
    exclude
        Phases not allowed to appear.
    pressure
        Pa.
    parameters
        Free model parameter name -> value (read-only).
    candidates
        Phases that may appear, the host included, sorted.
    system
        The `solubility.thermo.system.BoundSystem` holding every candidate at `pressure` and `parameters`.
    host
        The host's constitution (`HostModel`).
    """

    database: object
    phase: str
    solute: str
    balance: str
    fix: tuple[tuple[str, float], ...]
    exclude: tuple[str, ...]
    pressure: float
    parameters: Mapping[str, float]
    candidates: tuple[str, ...]
    system: object
    host: HostModel
    family: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    view: object = None  # `solubility.calc.partners.PartnerView`: the candidates as partners of this host

    @property
    def others(self) -> tuple[str, ...]:
        """Every candidate except the host."""
        return tuple(p for p in self.candidates if p != self.phase)

    def rebound(self, *, pressure: float | None = None, parameters: Mapping[str, float] | None = None) -> HostRequest:
        """The same request at another pressure (Pa) or other values of its free parameters; compiles nothing.

        Every part that holds the bound system (the system itself and the partner view) is bound anew, so a
        fit that changes a parameter's value changes it for the host and every candidate alike.
        """
        from solubility.calc.inputs import check_parameters, check_pressure

        p = self.pressure if pressure is None else check_pressure(pressure)
        params = dict(self.parameters) if parameters is None else check_parameters(parameters)
        system = self.system.compiled.bind(p, params)
        view = None if self.view is None else self.view.rebound(system)
        return dataclasses.replace(self, pressure=p, parameters=types.MappingProxyType(params), system=system,
                                   view=view)


def prepare_host(database, phase: str, solute: str, *, exclude: Sequence[str] = (),
                 fix: Mapping[str, float] | None = None, pressure: float = 101325.0, balance: str | None = None,
                 parameters: Mapping[str, float] | None = None, need_partner: bool = True) -> HostRequest:
    """Validate a host request and bind the compiled system it needs.

    Parameters
    ----------
    database
        Path to a TDB file, the name of a bundled database, or a pycalphad Database.
    phase
        Host phase, a two-sublattice (hosts)a(X,VA)c solution such as BCC_A2.
    solute
        Interstitial element, such as "C".
    exclude
        Phases not allowed to appear.
    fix
        u-fractions of other substitutional elements of the host, e.g. ``{"CR": 0.02}``.
    pressure
        Pa.
    balance
        The host's balance element; needed only when several substitutional elements are not in `fix`.
    parameters
        Values of database symbols left free at compile time (name -> value), e.g. a parameter being fitted.
        A new value does not compile anything.
    need_partner
        Require a second candidate phase (a solvus does; uptake at a set potential does not).

    Raises
    ------
    InputError, DatabaseError
        Any bad value, named in a one-line message.
    """
    from solubility.calc.inputs import check_request
    from solubility.calc.partners import PartnerView
    from solubility.thermo.cache import compiled_system
    from solubility.thermo.ordering import disordered_of, ordering_sublattices

    chk = check_request(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance,
                        parameters=parameters, need_partner=need_partner)
    ldb = chk.database
    key = None if ldb.sha256 is None else f"sha256:{ldb.sha256}"
    db = chk.work if chk.work is not None else ldb.db  # reduced to the request's elements: fast model builds
    compiled = compiled_system(db, chk.elements, chk.candidates, [n for n, _ in chk.parameters], key=key)
    system = compiled.bind(chk.pressure, dict(chk.parameters))
    host = host_model(system, chk.phase, chk.solute, dict(chk.fix), chk.balance)
    notes = list(chk.notes)
    undefined = {p: u for p, u in compiled.undefined.items() if p in chk.candidates}
    if undefined:
        notes.append("functions referenced but never defined (taken as zero by pycalphad): " + "; ".join(
            f"{p} {', '.join(u)}" for p, u in sorted(undefined.items())))
    for note in notes:
        warnings.warn(note, DatabaseWarning, stacklevel=3)
    view = PartnerView(system, chk.phase, chk.family,
                       {p: ordering_sublattices(db, p, chk.elements) for p in chk.candidates
                        if disordered_of(db, p)},
                       {p: disordered_of(db, p) for p in chk.candidates if disordered_of(db, p)})
    return HostRequest(ldb, chk.phase, chk.solute, chk.balance, chk.fix, chk.exclude, chk.pressure,
                       types.MappingProxyType(dict(chk.parameters)), chk.candidates, system, host,
                       chk.family, tuple(notes), view)


def host_potentials(req: HostRequest, s: float, T: float) -> tuple[np.ndarray, float]:
    """Chemical potentials of the elements in the host at ln(y_solute) = s and temperature T (K).

    Returns
    -------
    mu, residual
        J/mol in ``req.system.elements`` order, from the host's own tangent plane; and the relative residual of
        that solve (above about 1e-9 the host's constitution is not fixed by its composition). NaN potentials and
        residual where the Gibbs energy is not a finite number.
    """
    return req.system.chemical_potentials(req.host.phase, req.host.y(s), T)


def driving_forces(req: HostRequest, mu: np.ndarray, T: float, *,
                   hints: Mapping[str, np.ndarray] | None = None,
                   phases: Sequence[str] | None = None) -> dict[str, DrivingForce]:
    """Driving force of every candidate other than the host against the potentials `mu` at T.

    Parameters
    ----------
    req
        The host request.
    mu
        Chemical potentials, J/mol, ``req.system.elements`` order.
    T
        K.
    hints
        Phase -> site fractions to start its optimisation from (its optimum at a nearby state).
    phases
        The phases to evaluate (default: every candidate except the host).

    Returns
    -------
    dict of str to `solubility.thermo.phases.DrivingForce`
        J per mole of atoms, > 0 where the phase is more stable, with the optimal constitution. A phase whose
        sampled driving force is below -`REFINE_MARGIN` is reported at its best sample (a lower bound).

    Raises
    ------
    FloatingPointError
        A phase's Gibbs energy is not a finite number (a database fault); the message names the phase.
    """
    names = req.others if phases is None else tuple(phases)
    return refine(req.system, names, mu, T, hints, dict.fromkeys(names, REFINE_MARGIN))


def refine(system, phases: Sequence[str], mu: np.ndarray, T: float, hints: Mapping[str, np.ndarray] | None,
           margins: dict[str, float], quick: bool = False) -> dict[str, DrivingForce]:
    """`driving_forces` with the caller's margins (widened in place) and a quick mode.

    Each phase is first evaluated on its fixed constitution sample (a lower bound of its driving force). A phase
    whose best sample lies below minus its margin is taken as it is. Any other is refined: from its hint if it
    has one, and from its best sample where no hint is given or the sample beats the hint's optimum. With
    `quick`, when a sample already has a positive driving force (so the host is unstable there whatever
    refinement finds) the samples are returned unrefined.

    Raises
    ------
    FloatingPointError
        A phase's Gibbs energy is not a finite number at some sample or at its optimum.
    """
    hints = hints or {}
    screened = system.screen(mu, T, phases)
    _check_finite(((phase, best[0]) for phase, best in screened.items()), T)
    if quick and max((v for v, *_ in screened.values()), default=-math.inf) > 0:
        return {phase: DrivingForce(phase, *best, True) for phase, best in screened.items()}
    out = {}
    # ordered phases whose disordered phase is refined too come last: in the disordered state their optimum is
    # their disordered phase's (`solubility.calc.partners.PartnerView.as_disordered`), not optimised again
    twins = system.duplicates(phases) if hasattr(system, "duplicates") else {}
    for phase in sorted(screened, key=lambda p: p in twins):
        value, y_best, x_best = screened[phase]
        if value < -margins[phase]:
            out[phase] = DrivingForce(phase, value, y_best, x_best, True)
            continue
        hint = hints.get(phase)
        parent = out.get(twins.get(phase, ""))
        if parent is not None:
            same = system.as_disordered(phase, parent, mu, T, y_best, hint)
            if same is not None and abs(same.value - parent.value) <= DF_TOL and same.value >= value - DF_TOL:
                out[phase] = same
                continue
        best = system.driving_force(phase, mu, T, hint if hint is not None else y_best)
        if hint is not None and value > best.value + DF_TOL:
            alt = system.driving_force(phase, mu, T, y_best)
            if alt.value > best.value:
                best = alt
        _check_finite([(phase, best.value)], T)
        margins[phase] = max(margins[phase], 20.0 * (best.value - value))
        out[phase] = best
    return out


def _check_finite(items, T: float) -> None:
    """Raise FloatingPointError naming the first phase whose driving force is not a finite number (a NaN or
    infinite Gibbs energy: a database fault such as LN of a negative number), so the point fails, never passes."""
    for phase, value in items:
        if not math.isfinite(value):
            raise FloatingPointError(f"the Gibbs energy of {phase} is not a finite number at T = {T:g} K")


def host_model(system, phase: str, solute: str, fix: Mapping[str, float], balance: str) -> HostModel:
    """The host's constitution as a function of ln(y_solute).

    The interstitial sublattice is the one holding VA and the solute (nothing else may be on it among the
    system's elements). Every other sublattice is fixed: one constituent at site fraction 1, or the
    substitutional elements at their u-fractions (the balance takes 1 - sum(fix)), which for a single
    substitutional sublattice are exactly its site fractions.

    Raises
    ------
    InputError
        The phase is not of the form (hosts)a(X,VA)c over the chosen elements.
    """
    pf = system.phases[phase]
    groups = [[int(j) for j in np.flatnonzero(pf.sublattice_of == k)] for k in range(pf.n_sublattices)]
    names = [[pf.species[j] for j in g] for g in groups]
    inter = [k for k, sp in enumerate(names) if "VA" in sp and solute in sp]
    if len(inter) != 1:
        raise InputError(f"phase {phase} has no interstitial sublattice holding {solute} and VA" if not inter
                         else f"phase {phase} holds {solute} on {len(inter)} sublattices; one is supported")
    k_int = inter[0]
    charged = sorted({n for sp in names for n in sp if any(ch in n for ch in "+-")})
    mixed = [k for k, sp in enumerate(names) if k != k_int and len(sp) > 1]
    if charged or len(mixed) > 1:
        why = (f"holds charged constituents ({', '.join(charged)})" if charged
               else f"has {len(mixed)} mixed substitutional sublattices")
        raise InputError(f"host phase {phase} {why}; handled hosts are (hosts)a({solute},VA)c with one mixed "
                         "substitutional sublattice and no ions, or the disordered part of an ordered phase "
                         "(named by either name)")
    extra = [n for n in names[k_int] if n not in (solute, "VA")]
    if extra:
        raise InputError(f"the interstitial sublattice of {phase} also holds {', '.join(extra)}; only {solute} "
                         "and VA may share it among the chosen elements")
    u = {**fix, balance: 1.0 - sum(fix.values())}
    base = np.zeros(pf.ny)
    a = 0.0
    for k, (group, sp) in enumerate(zip(groups, names, strict=True)):
        if k == k_int:
            continue
        missing = [n for n in sp if n not in u and len(sp) > 1]
        if missing:
            raise InputError(f"sublattice {k} of {phase} holds {', '.join(sp)}; give the contents of "
                             f"{', '.join(missing)} with fix, or leave those elements out")
        for j, n in zip(group, sp, strict=True):
            base[j] = 1.0 if len(sp) == 1 else u[n]
        a += pf.site_ratios[k]
    solute_index = groups[k_int][names[k_int].index(solute)]
    vacancy_index = groups[k_int][names[k_int].index("VA")]
    return HostModel(phase, solute, base, solute_index, vacancy_index, a, pf.site_ratios[k_int])
