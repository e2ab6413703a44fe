"""Validate a solvus request and build (or fetch from the cache) the compiled system it needs.

Everything the user gives is checked here, before any equilibrium work, with one-line errors that name the bad
value and what is accepted.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from solubility.errors import InputError

__all__ = ["SolvusJob", "check_fix", "host_elements", "host_model", "prepare"]

@dataclass(frozen=True)
class SolvusJob:
    """A validated solvus request with its compiled system."""

    database: object  # LoadedDatabase
    phase: str
    solute: str
    balance: str
    fix: tuple[tuple[str, float], ...]
    exclude: tuple[str, ...]
    pressure: float
    candidates: tuple[str, ...]
    system: object  # ThermoSystem
    host: object  # HostModel


def check_fix(fix: Mapping[str, float] | None) -> dict[str, float]:
    if fix is None:
        return {}
    if not isinstance(fix, Mapping):
        raise InputError(f"fix {fix!r} is not a mapping of element to u-fraction, e.g. {{'CR': 0.02}}")
    out: dict[str, float] = {}
    for el, val in fix.items():
        name = str(el).strip().upper()
        try:
            u = float(val)
        except (TypeError, ValueError):
            raise InputError(f"fix {el}={val!r} is not a number; give a u-fraction in (0, 1)") from None
        if not math.isfinite(u) or not 0.0 < u < 1.0:
            raise InputError(f"fix {el}={val!r} is outside (0, 1); give a u-fraction in (0, 1)")
        if name in out:
            raise InputError(f"fix names {name} twice")
        out[name] = u
    total = sum(out.values())
    if total >= 1.0:
        raise InputError(f"fix contents sum to {total:g}; they must sum to less than 1 (the balance takes the rest)")
    return out


def _check_pressure(pressure: float) -> float:
    try:
        p = float(pressure)
    except (TypeError, ValueError):
        raise InputError(f"pressure {pressure!r} is not a number; give Pa > 0") from None
    if not math.isfinite(p) or p <= 0:
        raise InputError(f"pressure {pressure!r} must be a finite number of Pa > 0")
    return p


def _substitutional_elements(species, solute: str) -> tuple[int, list[str]]:
    """Index of the interstitial sublattice and the substitutional elements of a (hosts)a(X,VA)c phase."""
    inter = [i for i, sp in enumerate(species) if "VA" in sp and solute in sp]
    if not inter:
        raise InputError(f"no sublattice holding {solute} and VA")
    subst = sorted({el for i, sp in enumerate(species) if i != inter[0] for el in sp if el != "VA"})
    return inter[0], subst


def host_elements(ldb, phase: str, solute: str, fix: dict[str, float], balance: str | None) -> str:
    from solubility.databases.reader import check_elements

    _, species = ldb.sublattices(phase)
    try:
        _, subst = _substitutional_elements(species, solute)
    except InputError:
        held = " : ".join(",".join(sp) for sp in species)
        raise InputError(
            f"phase {phase} ({held}) has no interstitial sublattice holding {solute} and VA; "
            f"a host phase must be (hosts)a({solute},VA)c"
        ) from None
    for el in fix:
        if el not in subst:
            raise InputError(f"fix element {el} is not on a substitutional sublattice of {phase}; "
                             f"those hold {', '.join(subst)}")
    if balance is not None:
        (balance,) = check_elements(ldb, [balance])
        if balance not in subst:
            raise InputError(f"balance element {balance} is not on a substitutional sublattice of {phase}; "
                             f"those hold {', '.join(subst)}")
        if balance in fix:
            raise InputError(f"balance element {balance} is also given in fix")
        return balance
    rest = [el for el in subst if el not in fix]
    if not rest:
        raise InputError(f"fix gives every element of the substitutional sublattice of {phase} "
                         f"({', '.join(subst)}); leave one out as the balance, which takes the rest")
    if len(rest) != 1:
        raise InputError(
            f"host phase {phase} holds {', '.join(rest)} on its substitutional sublattice besides the fixed "
            "elements; say which is the balance (balance=... or --balance EL)"
        )
    return rest[0]


def prepare(database, phase: str, solute: str, *, exclude: Sequence[str] = (),
            fix: Mapping[str, float] | None = None, pressure: float = 101325.0,
            balance: str | None = None) -> SolvusJob:
    """Check a solvus request against its database and build the compiled system.

    Raises
    ------
    InputError, DatabaseError
        Any bad value, named in a one-line message.
    """
    from solubility.databases.reader import check_elements, check_phases, load_database
    from solubility.thermo.system import filter_candidate_phases, get_system

    ldb = load_database(database)
    if not isinstance(phase, str) or not phase.strip():
        raise InputError(f"phase {phase!r} is not a phase name")
    (phase,) = check_phases(ldb, [phase.strip().upper()])
    if not isinstance(solute, str) or not solute.strip():
        raise InputError(f"solute {solute!r} is not an element name")
    (solute,) = check_elements(ldb, [solute.strip().upper()])
    if solute == "VA":
        raise InputError("solute VA is the vacancy, not an element; give an interstitial element such as C")
    if isinstance(exclude, str):
        exclude = [exclude]
    for p_name in exclude or ():
        if not isinstance(p_name, str) or not p_name.strip():
            raise InputError(f"excluded phase {p_name!r} is not a phase name")
    excluded = check_phases(ldb, [str(p).strip().upper() for p in exclude]) if exclude else ()
    if phase in excluded:
        raise InputError(f"host phase {phase} is also excluded")
    fixed = check_fix(fix)
    check_elements(ldb, list(fixed))
    if solute in fixed:
        raise InputError(f"solute {solute} cannot also be fixed")
    p = _check_pressure(pressure)
    bal = host_elements(ldb, phase, solute, fixed, balance)
    elements = sorted({bal, solute, *fixed})
    candidates = [ph for ph in filter_candidate_phases(ldb.db, elements) if ph not in excluded]
    if phase not in candidates:
        raise InputError(f"host phase {phase} cannot form from {', '.join(elements)}")
    if len(candidates) < 2:
        raise InputError(f"no candidate partner phase for {phase} from {', '.join(elements)} once "
                         f"{', '.join(excluded) or 'nothing'} is excluded")
    key = ldb.sha256 or f"memory:{id(ldb.db)}"
    system = get_system(ldb.db, key, elements, candidates, p)
    host = host_model(system, phase, solute, fixed, bal)
    return SolvusJob(ldb, phase, solute, bal, tuple(sorted(fixed.items())), tuple(excluded), p,
                     tuple(candidates), system, host)


def host_model(system, phase: str, solute: str, fix: Mapping[str, float], balance: str):
    """The host's constitution as a function of ln(y_solute): a `solubility.calc.boundary.HostModel`.

    The interstitial sublattice is the one holding VA and the solute (nothing else may be on it among the
    system's elements). Every other sublattice is fixed: one constituent at site fraction 1, or the
    substitutional elements at their u-fractions (the balance takes 1 - sum(fix)), which for a single
    substitutional sublattice are exactly its site fractions.

    Raises
    ------
    InputError
        The phase is not of the form (hosts)a(X,VA)c over the chosen elements.
    """
    from solubility.calc.boundary import HostModel

    pf = system.phases[phase]
    groups = [[int(j) for j in np.flatnonzero(pf.sublattice_of == k)] for k in range(pf.n_sublattices)]
    names = [[pf.species[j] for j in g] for g in groups]
    inter = [k for k, sp in enumerate(names) if "VA" in sp and solute in sp]
    if len(inter) != 1:
        raise InputError(f"phase {phase} has no interstitial sublattice holding {solute} and VA" if not inter
                         else f"phase {phase} holds {solute} on {len(inter)} sublattices; one is supported")
    k_int = inter[0]
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
