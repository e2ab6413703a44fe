"""Site-ratio audit: does each interstitial phase of a database match the site geometry of its lattice?

A phase is audited when it has an interstitial sublattice: one holding VA and at least one other species, none
of which appears on another sublattice (so VA there is an empty interstitial site, not a vacancy among
substitutional atoms), while another sublattice holds the host. Where several sublattices qualify, the one
whose other species are all light interstitial elements (B, C, H, N, O) is taken, else the last one. The host
sites ``a`` are the sum of the site ratios of the other occupied sublattices (an ordered superstructure splits
one lattice into several sublattices), the interstitial sites ``c`` the ratio of the interstitial one.

The lattice comes from a user mapping, else from the Strukturbericht tag in the phase name, read between
``_`` and ``#``: A1 -> fcc, A2 -> bcc, A3 -> hcp, A4 -> diamond, Ah -> sc; the words FCC, BCC, HCP, DIAMOND
(as in A2_BCC) count too. The ordered superstructures B2 (CsCl type, on bcc) and L1_2 (Cu3Au type, on fcc) are
taken as their parent lattice: their host sublattices together fill the parent lattice, so the count of
octahedral sites per host atom is the parent's (the sites split into kinds by their neighbours; the count does
not change). Conflicting tags leave the lattice unknown.

Verdicts: ``consistent`` (c/a equals the count n of one site family per host atom), ``consistent with
blocking`` (c/a below the count of the smallest family with n >= c/a; blocking b = 1 - (c/a)/n), ``no
geometric match`` (c/a above every family's count), ``lattice unknown``.
"""

from __future__ import annotations

import functools
import re
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from solubility.constants import DEFAULT_SITE_KIND, INTERSTITIAL_ELEMENTS
from solubility.errors import InputError

__all__ = ["LATTICE_TAGS", "VERDICTS", "AuditRow", "audit_database", "lattice_from_name"]

#: Strukturbericht tags and lattice words in phase names -> built-in lattice (see the module docstring)
LATTICE_TAGS = {
    "A1": "fcc",
    "A2": "bcc",
    "A3": "hcp",
    "A4": "diamond",
    "AH": "sc",
    "B2": "bcc",
    "L12": "fcc",
    "FCC": "fcc",
    "BCC": "bcc",
    "HCP": "hcp",
    "DIAMOND": "diamond",
}
_WORDS = frozenset({"FCC", "BCC", "HCP", "DIAMOND"})
VERDICTS = ("consistent", "consistent with blocking", "no geometric match", "lattice unknown")
_LATTICES = ("fcc", "bcc", "hcp", "sc", "diamond")
_MATCH_TOL = 1e-6  # relative tolerance on c/a = n: TDB files write ratios with 4 to 6 digits


@dataclass(frozen=True)
class AuditRow:
    """The audit of one interstitial phase.

    Attributes
    ----------
    name
        Phase name.
    site_ratios
        Site ratios of all sublattices, as in the database.
    constituents
        Sorted species on each sublattice.
    structure
        Lattice taken (fcc, bcc, hcp, diamond, sc) or None.
    site_kind, sites_per_host_atom
        The matching site family and its count n per host atom, or None.
    blocking
        b = 1 - (c/a)/n (0 for an exact match), or None.
    verdict
        One of `VERDICTS` (the JSON key is ``consistent``).
    note
        One sentence for a reader.
    host_sites, interstitial_sites
        a and c used.
    """

    name: str
    site_ratios: tuple[float, ...]
    constituents: tuple[tuple[str, ...], ...]
    structure: str | None
    site_kind: str | None
    sites_per_host_atom: float | None
    blocking: float | None
    verdict: str
    note: str
    host_sites: float
    interstitial_sites: float

    def to_dict(self) -> dict[str, Any]:
        """The JSON form of design.md (``consistent`` holds the verdict string)."""
        return {
            "name": self.name,
            "site_ratios": list(self.site_ratios),
            "constituents": [list(s) for s in self.constituents],
            "structure": self.structure,
            "site_kind": self.site_kind,
            "sites_per_host_atom": self.sites_per_host_atom,
            "blocking": self.blocking,
            "consistent": self.verdict,
            "note": self.note,
        }


def lattice_from_name(phase: str) -> tuple[str | None, str]:
    """Lattice from the tags of a phase name, and a note on how (or why not) it was found."""
    parts = [p for p in re.split(r"[_#]", phase.upper()) if p]
    found = {LATTICE_TAGS[p] for p in parts if p in LATTICE_TAGS}
    tags = sorted((p for p in parts if p in LATTICE_TAGS), key=lambda t: t in _WORDS)  # tags before words
    if len(found) == 1:
        return found.pop(), f"lattice from the tag {tags[0]} in the name"
    if found:
        return None, f"conflicting lattice tags {tags} in the name"
    return None, "no Strukturbericht tag in the name"


def _interstitial_sublattice(constituents: tuple[tuple[str, ...], ...]) -> int | None:
    candidates = []
    for i, subl in enumerate(constituents):
        others = {s for j, sp in enumerate(constituents) if j != i for s in sp if s != "VA"}
        real = [s for s in subl if s != "VA"]
        if "VA" in subl and real and not (set(real) & others) and others:
            candidates.append(i)
    if not candidates:
        return None
    light = [i for i in candidates if all(s in INTERSTITIAL_ELEMENTS for s in constituents[i] if s != "VA")]
    return (light or candidates)[-1]


@functools.cache
def _families(lattice: str) -> tuple[tuple[str, float], ...]:
    from solubility.geometry.sites import find_sites
    from solubility.geometry.structure import builtin_structure

    return tuple((str(f.kind), float(f.per_host_atom)) for f in find_sites(builtin_structure(lattice)))


def _match(lattice: str, ratio: float) -> tuple[str | None, float | None, float | None, str]:
    """(site kind, n, blocking, verdict) for c/a = `ratio` on `lattice`."""
    fams = _families(lattice)
    exact = [f for f in fams if abs(f[1] - ratio) <= _MATCH_TOL * f[1]]
    if exact:
        pref = [f for f in exact if f[0] == DEFAULT_SITE_KIND.get(lattice)]
        kind, n = (pref or exact)[0]
        return kind, n, 0.0, "consistent"
    above = sorted((f for f in fams if f[1] > ratio), key=lambda f: f[1])
    if above:
        kind, n = above[0]
        return kind, n, 1.0 - ratio / n, "consistent with blocking"
    return None, None, None, "no geometric match"


def _note(verdict: str, kind: str | None, n: float | None, b: float | None, ratio: float, how: str) -> str:
    if verdict == "consistent":
        return f"c/a = {ratio:g} equals the {kind} sites per host atom (n = {n:g}), all available; {how}"
    if verdict == "consistent with blocking":
        return (
            f"c/a = {ratio:g} is {1 - b:g} of the {kind} sites per host atom (n = {n:g}): "  # type: ignore[operator]
            f"blocking b = {b:g}; {how}"
        )
    if verdict == "no geometric match":
        return f"c/a = {ratio:g} exceeds the count of every site family of the lattice; {how}"
    return f"{how}; map it with --structure PHASE=LATTICE ({', '.join(_LATTICES)})"


def _audit_phase(
    name: str, ratios: tuple[float, ...], species: tuple[tuple[str, ...], ...], lattice: str | None, how: str
) -> AuditRow | None:
    k = _interstitial_sublattice(species)
    if k is None:
        return None
    a = sum(r for i, r in enumerate(ratios) if i != k and any(s != "VA" for s in species[i]))
    c = ratios[k]
    ratio = c / a
    if lattice is None:
        kind = n = b = None
        verdict = "lattice unknown"
    else:
        kind, n, b, verdict = _match(lattice, ratio)
    return AuditRow(
        name, ratios, species, lattice, kind, n, b, verdict, _note(verdict, kind, n, b, ratio, how), a, c
    )


def _check_map(structure_map: Mapping[str, str] | None) -> dict[str, str]:
    out = {}
    for phase, lattice in (structure_map or {}).items():
        lat = str(lattice).strip().lower()
        if lat not in _LATTICES:
            raise InputError(f"lattice {lattice!r} for phase {phase!r} is not one of {', '.join(_LATTICES)}")
        out[str(phase).strip().upper()] = lat
    return out


def audit_database(spec: Any, *, structure_map: Mapping[str, str] | None = None) -> list[AuditRow]:
    """Audit the site ratios of every interstitial phase of a database against the site geometry.

    Parameters
    ----------
    spec
        Anything `solubility.databases.reader.load_database` takes, or a LoadedDatabase.
    structure_map
        ``{phase: lattice}`` overriding the lattice read from the phase name (lattice: fcc, bcc, hcp, sc,
        diamond).

    Returns
    -------
    list of AuditRow
        One per interstitial phase, sorted by phase name (phases without an interstitial sublattice are left
        out).

    Raises
    ------
    DatabaseError
        The database cannot be read, or the mapping names a phase it does not have.
    InputError
        The mapping names an unknown lattice.
    """
    from solubility.databases.reader import LoadedDatabase, check_phases, load_database

    ldb = spec if isinstance(spec, LoadedDatabase) else load_database(spec)
    mapping = _check_map(structure_map)
    check_phases(ldb, mapping)
    rows = []
    for name in ldb.phases:
        ratios, species = ldb.sublattices(name)
        if name in mapping:
            lattice, how = mapping[name], "lattice given by the user"
        else:
            lattice, how = lattice_from_name(name)
        row = _audit_phase(name, ratios, species, lattice, how)
        if row is not None:
            rows.append(row)
    return rows
