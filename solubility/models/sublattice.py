"""Two-sublattice interstitial models ``(hosts)a (X, ..., VA)c``: the model object.

The site ratio of the interstitial sublattice keeps three numbers apart (design.md):

* ``n``: the geometric count of interstitial sites of one family per host atom (from `solubility.geometry.sites`);
* ``b``: a blocking fraction, the share of those sites made unavailable by repulsion between neighbouring
  solutes, ``0 <= b < 1``;
* ``c = a n (1 - b)``: the site ratio written into the database (``a`` host sites per formula unit).

Common practice (the SGTE unary data, Dinsdale, Calphad 15 (1991) 317, define the phases this way): FCC_A1 is
``(M)1 (X,VA)1`` (octahedral, n = 1), BCC_A2 ``(M)1 (X,VA)3`` (octahedral, n = 3), HCP_A3 ``(M)1 (X,VA)0.5``:
octahedral (n = 1) with half of the sites blocked (b = 0.5), so the filled end-member is M2X.

Its TDB text: `solubility.models.tdb_writer`; closed forms of the ideal solution: `solubility.models.closed_forms`;
re-expressing a phase with another site ratio: `solubility.models.site_ratio`. No pycalphad, xarray or matplotlib.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from solubility.constants import DEFAULT_PHASE_NAMES, DEFAULT_SITE_KIND
from solubility.errors import InputError, StructureError

if TYPE_CHECKING:  # pragma: no cover
    from solubility.geometry.sites import SiteFamily

__all__ = ["SublatticeModel", "default_phase_name"]

_ELEMENT_RE = re.compile(r"^[A-Z][A-Z]?$")
_PHASE_RE = re.compile(r"^[A-Z][A-Z0-9_]*(#[0-9]+)?$")
_REL_TOL = 1e-9


def default_phase_name(structure: str) -> str:
    """The conventional phase name of a built-in lattice (``fcc`` -> ``FCC_A1``, ...).

    Raises
    ------
    InputError
        `structure` is not one of fcc, bcc, hcp, diamond, sc.
    """
    try:
        return DEFAULT_PHASE_NAMES[structure.lower()]
    except KeyError:
        raise InputError(
            f"no default phase name for structure {structure!r}; give --phase, or one of "
            f"{', '.join(DEFAULT_PHASE_NAMES)}"
        ) from None


def _element_names(names: Sequence[str] | str, what: str) -> tuple[str, ...]:
    if isinstance(names, str):
        names = (names,)
    out = tuple(str(n).strip().upper() for n in names)
    if not out:
        raise InputError(f"no {what} given; give at least one element symbol")
    for n in out:
        if n == "VA":
            raise InputError(f"VA among the {what}: vacancies are implied on the interstitial sublattice")
        if not _ELEMENT_RE.match(n):
            raise InputError(f"{what[:-1]} {n!r} is not an element symbol (one or two letters, e.g. FE, C)")
    if len(set(out)) != len(out):
        raise InputError(f"{what} {list(out)} repeat an element; give each once")
    return out


def _positive(value: float, what: str) -> float:
    v = float(value)
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"{what} = {value!r} must be a finite number greater than zero")
    return v


@dataclass(frozen=True)
class SublatticeModel:
    """An interstitial solution ``(hosts)a (interstitials, VA)c``.

    Attributes
    ----------
    phase
        Phase name, upper case (a TDB symbol, e.g. ``BCC_A2``).
    hosts
        Substitutional species on the first sublattice (upper case element symbols).
    interstitials
        Interstitial species on the second sublattice; vacancies (VA) are implied there.
    a, c
        Site ratios of the host and interstitial sublattices (sites per formula unit), ``c = a n (1 - b)``.
    sites_per_host_atom
        Geometric count n of interstitial sites of the family per host atom, or None where unknown (a model
        given by its ratios only).
    blocking
        Blocking fraction b in [0, 1): share of the n sites that solutes may not occupy.
    site_kind
        Kind of the site family (``octahedral``, ``tetrahedral``, ...) or None.
    structure
        Lattice the model was built for (``bcc``, ...) or None; used in comments only.
    """

    phase: str
    hosts: tuple[str, ...]
    interstitials: tuple[str, ...]
    a: float = 1.0
    c: float = 1.0
    sites_per_host_atom: float | None = None
    blocking: float = 0.0
    site_kind: str | None = None
    structure: str | None = None

    def __post_init__(self) -> None:
        phase = str(self.phase).strip().upper()
        if not _PHASE_RE.match(phase):
            raise InputError(
                f"phase name {self.phase!r} is not a TDB name (letters, digits and _, e.g. BCC_A2)"
            )
        object.__setattr__(self, "phase", phase)
        hosts = _element_names(self.hosts, "hosts")
        inter = _element_names(self.interstitials, "interstitials")
        both = sorted(set(hosts) & set(inter))
        if both:
            raise InputError(
                f"{both} given both as host and as interstitial; an element sits on one sublattice"
            )
        object.__setattr__(self, "hosts", hosts)
        object.__setattr__(self, "interstitials", inter)
        object.__setattr__(self, "a", _positive(self.a, "host site ratio a"))
        object.__setattr__(self, "c", _positive(self.c, "interstitial site ratio c"))
        b = float(self.blocking)
        if not (math.isfinite(b) and 0.0 <= b < 1.0):
            raise InputError(f"blocking = {self.blocking!r} must be in [0, 1)")
        object.__setattr__(self, "blocking", b)
        if self.sites_per_host_atom is not None:
            n = _positive(self.sites_per_host_atom, "sites per host atom n")
            object.__setattr__(self, "sites_per_host_atom", n)
            expected = self.a * n * (1.0 - b)
            if abs(self.c - expected) > _REL_TOL * expected:
                raise InputError(
                    f"site ratio c = {self.c!r} disagrees with a n (1 - b) = {expected!r}; "
                    "give c = a n (1 - b), or leave c out"
                )

    # -- construction -------------------------------------------------------------------------------
    @classmethod
    def from_ratios(
        cls,
        phase: str,
        hosts: Sequence[str] | str,
        interstitials: Sequence[str] | str,
        *,
        a: float,
        c: float,
    ) -> SublatticeModel:
        """A model given by its site ratios only (n and the site kind unknown)."""
        return cls(phase, tuple(_as_seq(hosts)), tuple(_as_seq(interstitials)), a=a, c=c)

    @classmethod
    def from_site_family(
        cls,
        phase: str,
        hosts: Sequence[str] | str,
        interstitials: Sequence[str] | str,
        family: SiteFamily | Any,
        *,
        blocking: float = 0.0,
        a: float = 1.0,
        structure: str | None = None,
    ) -> SublatticeModel:
        """A model on one site family of `solubility.geometry.sites`: ``c = a n (1 - b)``, n = family.per_host_atom."""
        n = _positive(getattr(family, "per_host_atom", float("nan")), "sites per host atom of the family")
        a = _positive(a, "host site ratio a")
        b = float(blocking)
        if not (math.isfinite(b) and 0.0 <= b < 1.0):
            raise InputError(f"blocking = {blocking!r} must be in [0, 1)")
        return cls(
            phase,
            tuple(_as_seq(hosts)),
            tuple(_as_seq(interstitials)),
            a=a,
            c=a * n * (1.0 - b),
            sites_per_host_atom=n,
            blocking=b,
            site_kind=str(family.kind),
            structure=structure,
        )

    @classmethod
    def from_structure(
        cls,
        phase: str | None,
        hosts: Sequence[str] | str,
        interstitials: Sequence[str] | str,
        structure_name: str,
        site_kind: str | None = None,
        *,
        blocking: float = 0.0,
        c_over_a: float | None = None,
    ) -> SublatticeModel:
        """A model on a lattice (built-in name or structure file) and one of its site families.

        Parameters
        ----------
        phase
            Phase name, or None for the conventional one of a built-in lattice (`DEFAULT_PHASE_NAMES`).
        structure_name
            fcc, bcc, hcp, sc, diamond, or a structure file (`solubility.geometry.structure.load_structure`).
        site_kind
            Kind of site family, or None for the one C and N usually take in a built-in lattice
            (`DEFAULT_SITE_KIND`); required for a structure file.
        c_over_a
            Axial ratio for hcp (ideal when None).

        Raises
        ------
        StructureError
            The lattice has no site family of that kind (the message lists the kinds it has), or the
            structure file is invalid.
        InputError
            A structure file without a phase name or a site kind.
        """
        from solubility.geometry.sites import find_sites
        from solubility.geometry.structure import load_structure

        text = str(structure_name).strip()
        builtin = text.lower() in DEFAULT_PHASE_NAMES
        label = text.lower() if builtin else text
        kwargs = {} if c_over_a is None else {"c_over_a": c_over_a}
        families = find_sites(load_structure(label, **kwargs))
        kind = (site_kind or (DEFAULT_SITE_KIND[label] if builtin else "")).strip().lower()
        if not kind:
            kinds = ", ".join(sorted({str(f.kind) for f in families})) or "none"
            raise InputError(f"give the site kind for structure {text!r} (it has {kinds})")
        if not phase and not builtin:
            raise InputError(f"give a phase name for structure {text!r} (no conventional name for a file)")
        family = _pick_family(families, kind, label)
        return cls.from_site_family(
            phase if phase else default_phase_name(label),
            hosts,
            interstitials,
            family,
            blocking=blocking,
            structure=label,
        )

    # -- views --------------------------------------------------------------------------------------
    @property
    def constituents(self) -> tuple[tuple[str, ...], tuple[str, ...]]:
        """Species on each sublattice: ``(hosts, interstitials + ("VA",))``."""
        return self.hosts, (*self.interstitials, "VA")

    @property
    def site_ratios(self) -> tuple[float, float]:
        """``(a, c)``."""
        return self.a, self.c

    @property
    def elements(self) -> tuple[str, ...]:
        """Every element of the model, VA included."""
        return (*self.hosts, *self.interstitials, "VA")

    def end_members(self) -> tuple[str, ...]:
        """Constituent arrays of the end-members, ``M:X`` and ``M:VA`` for every host M and interstitial X."""
        return tuple(f"{m}:{x}" for m in self.hosts for x in self.constituents[1])

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe description of the model."""
        return {
            "phase": self.phase,
            "hosts": list(self.hosts),
            "interstitials": list(self.interstitials),
            "site_ratios": [self.a, self.c],
            "constituents": [list(s) for s in self.constituents],
            "sites_per_host_atom": self.sites_per_host_atom,
            "blocking": self.blocking,
            "site_kind": self.site_kind,
            "structure": self.structure,
        }

    # -- TDB output ---------------------------------------------------------------------------------
    def tdb_block(
        self,
        parameters: Mapping[str, str] | None = None,
        *,
        elements: Mapping[str, tuple[str, float, float, float]] | None = None,
    ) -> str:
        """The TDB text of the phase (`solubility.models.tdb_writer.phase_block`)."""
        from solubility.models.tdb_writer import phase_block

        return phase_block(self, parameters, elements=elements)


def _as_seq(names: Sequence[str] | str) -> Sequence[str]:
    return (names,) if isinstance(names, str) else names


def _pick_family(families: Sequence[Any], kind: str, structure: str) -> Any:
    kinds = [str(f.kind) for f in families]
    matches = [f for f in families if str(f.kind).lower() == kind]
    if not matches:
        raise StructureError(
            f"site kind {kind!r} not found in {structure}; it has {', '.join(sorted(set(kinds))) or 'none'}"
        )
    return matches[0]
