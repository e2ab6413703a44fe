"""Two-sublattice interstitial models ``(hosts)a (X, ..., VA)c``: the model, its TDB text, and closed forms.

The site ratio of the interstitial sublattice keeps three numbers apart (design.md):

* ``n``: the geometric count of interstitial sites of one family per host atom (from `solubility.geometry.sites`);
* ``b``: a blocking fraction, the share of those sites made unavailable by repulsion between neighbouring
  solutes, ``0 <= b < 1``;
* ``c = a n (1 - b)``: the site ratio written into the database (``a`` host sites per formula unit).

Common practice (the SGTE unary data, Dinsdale, Calphad 15 (1991) 317, define the phases this way): FCC_A1 is
``(M)1 (X,VA)1`` (octahedral, n = 1), BCC_A2 ``(M)1 (X,VA)3`` (octahedral, n = 3), HCP_A3 ``(M)1 (X,VA)0.5``:
octahedral (n = 1) with half of the sites blocked (b = 0.5), so the filled end-member is M2X.

Closed forms (ideal mixing on each sublattice, one interstitial species X; derivation in `formulas`):

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

This module does not import pycalphad, xarray or matplotlib; sympy is imported only by `formulas`.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from solubility.errors import InputError, StructureError

if TYPE_CHECKING:  # pragma: no cover
    from solubility.geometry.sites import SiteFamily

__all__ = [
    "DEFAULT_PHASE_NAMES",
    "DEFAULT_SITE_KIND",
    "GAS_CONSTANT",
    "INTERSTITIAL_ELEMENTS",
    "DiluteSolubility",
    "SublatticeModel",
    "default_phase_name",
    "dilute_solubility",
    "formulas",
    "ideal_entropy",
    "x_from_y",
    "y_from_x",
]

#: molar gas constant, J/(mol K): the value pycalphad uses (8.3145), so closed forms and pycalphad agree to
#: machine precision (the 2018 CODATA value is 8.314462618; the difference is 6e-6 relative).
GAS_CONSTANT = 8.3145

#: the light elements that usually dissolve interstitially (common practice, no source)
INTERSTITIAL_ELEMENTS = ("B", "C", "H", "N", "O")

#: default phase name for each built-in lattice: the Strukturbericht tag convention of the SGTE unary data
#: (Dinsdale, Calphad 15 (1991) 317); simple cubic (alpha-Po, Strukturbericht A_h) is not an SGTE phase, the
#: name SC_AH is this tool's choice.
DEFAULT_PHASE_NAMES = {
    "fcc": "FCC_A1",
    "bcc": "BCC_A2",
    "hcp": "HCP_A3",
    "diamond": "DIAMOND_A4",
    "sc": "SC_AH",
}

#: the site family C and N usually occupy in each lattice (common practice, no source: octahedral in fcc,
#: bcc and hcp; the hexagonal site of diamond cubic and the cube centre of simple cubic are the largest holes)
DEFAULT_SITE_KIND = {
    "fcc": "octahedral",
    "bcc": "octahedral",
    "hcp": "octahedral",
    "diamond": "tetrahedral",
    "sc": "cubic",
}

_ELEMENT_RE = re.compile(r"^[A-Z][A-Z]?$")
_PHASE_RE = re.compile(r"^[A-Z][A-Z0-9_]*(#[0-9]+)?$")
_PARAM_KEY_RE = re.compile(r"^\s*([A-Z]+)\s*\(\s*([A-Z0-9_#]+)\s*,\s*([^;)]+?)\s*(?:;\s*([0-9]+)\s*)?\)\s*$")
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
        """The TDB text of the phase: a comment header, PHASE, CONSTITUENT and PARAMETER lines.

        Parameters
        ----------
        parameters
            ``{"G(PHASE,FE:C;0)": expression}``: TDB expressions (J per mole of formula units, functions with
            a trailing ``#``) for end-members or interactions of this phase. An expression without ``;`` is
            valid from 298.15 K to 6000 K; one with ``;`` is written as given and must be a full TDB range
            (``298.15 expr; 6000 N``). Every end-member not given gets a zero placeholder, marked in a
            comment.
        elements
            ``{element: (reference phase, mass g/mol, H298-H0 J/mol, S298 J/(mol K))}``: when given, ELEMENT
            lines for VA and every element of the model are written first, so the block loads on its own.

        Raises
        ------
        InputError
            A parameter names another phase, an unknown species or sublattice count, or its expression fails
            the database guards (`solubility.databases.reader.check_expression`).
        """
        from solubility.databases.reader import check_expression  # pure text checks; imports no pycalphad

        given = _normalise_parameters(self, parameters or {}, check_expression)
        lines = self._header_lines()
        if elements is not None:
            lines += _element_lines(self, elements)
        ratios = f"{_num(self.a)} {_num(self.c)}"
        lines += [
            " TYPE_DEFINITION % SEQ * !",
            f" PHASE {self.phase} % 2 {ratios} !",
            f" CONSTITUENT {self.phase} :{','.join(self.hosts)}:{','.join(self.constituents[1])}: !",
            "",
        ]
        placeholders = []
        for em in self.end_members():
            key = f"G({self.phase},{em};0)"
            if key not in given:
                placeholders.append(key)
        for key, expr in given.items():
            lines.append(f" PARAMETER {key} {_range(expr)} !")
        if placeholders:
            lines.append(
                "$ PLACEHOLDER: the end-members below were not given; their Gibbs energy is set to zero."
            )
            lines.append(
                "$ Replace each by an assessed expression before computing anything with this phase."
            )
            lines += [f" PARAMETER {key} 298.15 0; 6000 N !" for key in placeholders]
        return "\n".join(lines) + "\n"

    def _header_lines(self) -> list[str]:
        n = "unknown" if self.sites_per_host_atom is None else _num(self.sites_per_host_atom)
        kind = self.site_kind or "unknown"
        where = f" of {self.structure}" if self.structure else ""
        return [
            f"$ {self.phase}: ({','.join(self.hosts)}){_num(self.a)} "
            f"({','.join(self.constituents[1])}){_num(self.c)}, written by solubility",
            f"$ interstitial sites: {kind}{where}, n = {n} per host atom, blocking b = {_num(self.blocking)},"
            f" c = a n (1 - b) = {_num(self.c)}",
            "$ Gibbs energies in J per mole of formula units",
        ]


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


def _num(value: float) -> str:
    """A short exact-enough decimal for TDB text (``3``, ``0.5``, ``1.333333333333``)."""
    text = f"{value:.12g}"
    return text


def _element_lines(
    model: SublatticeModel, elements: Mapping[str, tuple[str, float, float, float]]
) -> list[str]:
    lines = [" ELEMENT VA   VACUUM   0.0 0.0 0.0 !"]
    for el in (*model.hosts, *model.interstitials):
        try:
            ref, mass, h298, s298 = elements[el]
        except KeyError:
            raise InputError(
                f"no reference data for element {el!r}; give it among the ELEMENT data"
            ) from None
        lines.append(f" ELEMENT {el:<3} {ref}  {float(mass)!r} {float(h298)!r} {float(s298)!r} !")
    return [*lines, ""]


def _range(expr: str) -> str:
    text = expr.strip()
    return text if ";" in text else f"298.15 {text}; 6000 N"


def _normalise_parameters(
    model: SublatticeModel, parameters: Mapping[str, str], check_expression: Any
) -> dict[str, str]:
    out: dict[str, str] = {}
    subl = model.constituents
    for raw_key, expr in parameters.items():
        key = str(raw_key).strip().upper()
        m = _PARAM_KEY_RE.match(key)
        if not m:
            raise InputError(f"parameter {raw_key!r} is not of the form G({model.phase},FE:C;0)")
        ptype, phase, array, order = m.group(1), m.group(2), m.group(3), m.group(4) or "0"
        if phase != model.phase:
            raise InputError(
                f"parameter {raw_key!r} names phase {phase!r}; this model's phase is {model.phase!r}"
            )
        parts = [p.strip() for p in array.split(":")]
        if len(parts) != 2:
            raise InputError(
                f"parameter {raw_key!r} has {len(parts)} sublattices; this model has 2 (host:site)"
            )
        species = []
        for i, part in enumerate(parts):
            names = [s.strip() for s in part.split(",")]
            bad = [s for s in names if s not in subl[i]]
            if bad or not all(names):
                raise InputError(
                    f"parameter {raw_key!r}: {bad or names} not on sublattice {i + 1}; "
                    f"it holds {list(subl[i])}"
                )
            species.append(",".join(names))
        text = str(expr).strip()
        if not text:
            raise InputError(f"parameter {raw_key!r} has an empty expression")
        _check_range_text(text, raw_key, check_expression)
        out[f"{ptype}({phase},{':'.join(species)};{int(order)})"] = text
    return out


def _check_range_text(text: str, key: str, check_expression: Any) -> None:
    """Run the database guards on every expression of a parameter value (raises InputError)."""
    from solubility.errors import DatabaseError

    exprs = [text] if ";" not in text else _range_expressions(text)
    for e in exprs:
        try:
            check_expression(e)
        except DatabaseError as exc:
            raise InputError(f"parameter {key!r}: {exc}") from None
    if "!" in text or "$" in text:
        raise InputError(f"parameter {key!r}: the expression may not contain '!' or '$'")


def _range_expressions(text: str) -> list[str]:
    from solubility.databases.reader import split_ranges

    return split_ranges(text)


# -- closed forms ---------------------------------------------------------------------------------------
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
