"""Order-disorder descriptions (a disordered phase and the ordered phases that use it as their DIS_PART).

In assessed databases BCC_A2 and FCC_A1 are usually the disordered parts of ordered phases
(``AMEND_PHASE_DESCRIPTION BCC_B2 DIS_PART BCC_A2``; FCC_L12, FCC_L10, ... over FCC_A1). pycalphad builds the
ordered phase as a partitioned model, ``G = G_dis(x) + G_ord(y) - G_ord(y = x)``, and drops the disordered name
from its phase lists. In its disordered state (equal site fractions on the ordering sublattices) the ordered phase
has exactly the Gibbs energy of the disordered phase at the same composition, so a host named ``BCC_A2`` is
computed from the disordered phase's own model (two sublattices, (hosts)a(X,VA)c), which is that state, and the
ordered phases stay candidates: an ordered optimum is a partner (B2, L12), a disordered optimum of an ordered
phase is the disordered phase (reported under its name; ``#2`` when it is the host's own second composition set).

Everything here reads the pycalphad ``Database`` only (its phases' ``model_hints``); nothing is compiled.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

__all__ = ["PhaseChoice", "choose_phases", "disordered_of", "order_families", "ordering_sublattices"]


def order_families(db) -> dict[str, tuple[str, ...]]:
    """Disordered phase name -> the ordered phases that use it as their DIS_PART (sorted)."""
    fam: dict[str, set[str]] = {}
    for name, phase in db.phases.items():
        hints = phase.model_hints
        dis = hints.get("disordered_phase")
        if hints.get("ordered_phase") == name and dis and dis != name and dis in db.phases:
            fam.setdefault(dis, set()).add(name)
    return {dis: tuple(sorted(ords)) for dis, ords in fam.items()}


def disordered_of(db, phase: str) -> str | None:
    """The disordered phase of an ordered `phase`, or None when `phase` is not an ordered phase."""
    hints = db.phases[phase].model_hints
    dis = hints.get("disordered_phase")
    if hints.get("ordered_phase") == phase and dis and dis != phase and dis in db.phases:
        return str(dis)
    return None


@dataclass(frozen=True)
class PhaseChoice:
    """The phases of a request after resolving order-disorder descriptions.

    Attributes
    ----------
    host
        The phase whose model computes the host (a disordered phase where the user named one of a pair, or its
        ordered phase by name).
    host_family
        Phases whose disordered state is the host's phase (the ordered forms of the host), besides the host.
    candidates
        Every phase that may appear, the host included, each buildable by pycalphad from the elements.
    warnings
        One line per decision the user should know about (an ordered description that could not be built).
    """

    host: str
    host_family: tuple[str, ...]
    candidates: tuple[str, ...]
    warnings: tuple[str, ...]


#: verdicts of `_buildable` by (id of the Database, components, phase), with the Database kept alive beside each
#: (so an id is never reused while its entry lives); a few hundred entries at most in a session
_BUILDABLE: dict[tuple, tuple[object, str]] = {}


def _buildable(db, comps: Sequence[str], phase: str) -> str:
    """'' when pycalphad builds a model of `phase` from `comps`; otherwise its one-line reason.

    Remembered per Database object (the reduced databases of `solubility.calc.inputs.working_database` are kept
    per process, so a repeated request does not build its ordered candidates' models again).
    """
    import warnings

    from pycalphad import Model

    key = (id(db), tuple(sorted(comps)), phase)
    seen = _BUILDABLE.get(key)
    if seen is not None and seen[0] is db:
        return seen[1]
    try:
        with warnings.catch_warnings():  # pycalphad's caution about partitioned physical properties: see system
            warnings.simplefilter("ignore")
            Model(db, list(comps), phase)
        reason = ""
    except Exception as exc:
        reason = " ".join(str(exc).split()) or type(exc).__name__
    if len(_BUILDABLE) > 512:
        _BUILDABLE.clear()
    _BUILDABLE[key] = (db, reason)
    return reason


def choose_phases(db, elements: Iterable[str], host: str, excluded: Iterable[str] = ()) -> PhaseChoice:
    """Candidate phases for a host in `db` from `elements` (plus VA), order-disorder descriptions resolved.

    pycalphad's own filter decides which phases can form. Each ordered phase whose disordered phase can form is
    then built once: one pycalphad cannot build (COST507's BCC_B2 with C on the disordered phase's interstitial
    sublattice but not on its own) is dropped with a warning and its disordered phase is used alone. A named host
    that is the disordered part of an ordered phase is kept under its own name (its model is the ordered phase's
    disordered state); a named ordered host is replaced by its disordered phase when pycalphad's filter keeps
    that, so its disordered state is the host and its ordered states stay partners.

    Parameters
    ----------
    db
        pycalphad Database.
    elements
        The elements of the request.
    host
        The host phase as the user named it (already checked to exist).
    excluded
        Phases not allowed to appear (names as in the database).
    """
    from pycalphad.core.utils import filter_phases, unpack_species

    comps = sorted({*elements, "VA"})
    species = unpack_species(db, comps)
    excluded = set(excluded)
    warnings: list[str] = []
    families = order_families(db)
    allowed = [p for p in db.phases if p not in excluded]
    ionic = sorted(p for p in allowed if db.phases[p].model_hints.get("ionic_liquid_2SL"))
    if ionic:  # site ratios that depend on the constitution: not handled by the compiled sample and optimiser
        allowed = [p for p in allowed if p not in ionic]
        ionic = [p for p in ionic if filter_phases(db, species, [p])]
        if ionic:
            warnings.append(f"{', '.join(ionic)} (two-sublattice ionic liquid) left out: not handled")
    try:
        kept = set(filter_phases(db, species, allowed))
    except ValueError:  # an ordered phase that is a superset of its disordered phase: judge phase by phase
        kept = set()
        for p in allowed:
            try:
                kept.update(filter_phases(db, species, [p]))
            except ValueError as exc:
                warnings.append(f"{p} left out: {exc}")
    # disordered phases: pycalphad hides them behind (one of) their ordered phases; bring them back
    for dis, ords in families.items():
        if dis in excluded or not filter_phases(db, species, [dis]):
            continue
        for o in ords:
            if o in kept:
                reason = _buildable(db, comps, o)
                if reason:
                    kept.discard(o)
                    warnings.append(f"ordered phase {o} cannot be built with {dis} as its disordered part from "
                                    f"{', '.join(c for c in comps if c != 'VA')} ({reason}); {dis} is used alone")
        kept.add(dis)
    host_phase = host
    dis = disordered_of(db, host)
    if dis is not None and dis in kept:
        host_phase = dis
    kept.add(host_phase)
    family = tuple(sorted(o for o in families.get(host_phase, ()) if o in kept))
    return PhaseChoice(host_phase, family, tuple(sorted(kept)), tuple(warnings))


def ordering_sublattices(db, phase: str, elements: Iterable[str]) -> tuple[int, ...]:
    """Indices of the sublattices of an ordered `phase` that order; () for a phase that is not ordered.

    pycalphad's rule (``_extend_ordered_if_subset_of_disorder``): the interstitial sublattice is the one holding
    exactly the disordered phase's second-sublattice constituents among the elements; every other sublattice
    orders.
    """
    dis = disordered_of(db, phase)
    if dis is None:
        return ()
    active = {*elements, "VA"}
    dis_subs = db.phases[dis].constituents
    inter = {s.name for s in dis_subs[1]} & active if len(dis_subs) == 2 else None
    out = []
    for k, sub in enumerate(db.phases[phase].constituents):
        names = {s.name for s in sub} & active
        if inter is not None and names == inter:
            continue
        out.append(k)
    return tuple(out)
