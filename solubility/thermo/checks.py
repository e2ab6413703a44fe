"""What a database leaves out for a request: missing end-members and functions referenced but never defined.

pycalphad takes a missing end-member Gibbs energy ``G(PHASE,A:B;0)`` and an undefined FUNCTION as zero without a
word. Zero is almost never right (an end-member at the pure-element reference energy; a GHSER... function with a
typo in its name), so the tool names them: a host without its solute end-member is refused, and the other
phases' gaps are listed in a warning and in the results' attrs.

Reads the pycalphad ``Database`` only (parameters and symbols); nothing is compiled.
"""

from __future__ import annotations

import itertools
from collections.abc import Iterable

__all__ = ["endmember_name", "missing_endmembers", "undefined_functions"]

#: at most this many end-members are listed per phase (a phase with many missing ones is named with a count)
MAX_LISTED = 4


def endmember_name(phase: str, constituents: Iterable[str]) -> str:
    """``G(PHASE,A:B;0)`` for an end-member given by one constituent per sublattice."""
    return f"G({phase},{':'.join(constituents)};0)"


def _defined_endmembers(db, phase: str) -> set[tuple[str, ...]]:
    out = set()
    for p in db._parameters.all():  # pycalphad keeps parameters in a TinyDB table
        if p["phase_name"] != phase or p["parameter_type"] != "G" or p["parameter_order"] != 0:
            continue
        ca = p["constituent_array"]
        if all(len(sub) == 1 for sub in ca):
            out.add(tuple(next(iter(sub)).name for sub in ca))
    return out


def missing_endmembers(db, phase: str, elements: Iterable[str]) -> list[str]:
    """End-members of `phase` among `elements` (plus VA) that have no ``G(...;0)`` parameter in `db`.

    End-members made only of vacancies and charged end-members are not asked for (pycalphad never needs a pure
    vacancy end-member; ionic descriptions give many charged end-members through their neutral combinations).
    An ordered phase's own end-members are not asked for either: in a partitioned description they carry only
    the ordering energy, which is zero where it is not given.
    """
    from solubility.thermo.ordering import disordered_of

    if disordered_of(db, phase) is not None:
        return []
    active = {*elements, "VA"}
    subs = []
    for sub in db.phases[phase].constituents:
        names = sorted(s.name for s in sub if s.name in active or _species_within(db, s, active))
        if not names:
            return []
        subs.append(names)
    charged = {s.name for s in db.species if getattr(s, "charge", 0)}
    defined = _defined_endmembers(db, phase)
    missing = []
    for combo in itertools.product(*subs):
        if all(c == "VA" for c in combo) or any(c in charged for c in combo):
            continue
        if combo not in defined:
            missing.append(endmember_name(phase, combo))
    return missing


def _species_within(db, species, active: set[str]) -> bool:
    """Whether a (molecular) species consists only of active elements."""
    cons = getattr(species, "constituents", {}) or {}
    return bool(cons) and set(cons) <= active


def undefined_functions(models) -> dict[str, list[str]]:
    """Phase name -> names of symbols left undefined in its built pycalphad model (taken as zero by pycalphad).

    Parameters
    ----------
    models
        Mapping of phase name to pycalphad ``Model``.
    """
    from pycalphad import variables as v

    out: dict[str, list[str]] = {}
    for name, model in models.items():
        undef = sorted({str(s) for s in model.ast.free_symbols if not isinstance(s, v.StateVariable)})
        if undef:
            out[name] = undef
    return out
