"""Interstitial site families of a host structure: find, classify, count, size; elastic misfit of a solute.

Method
------
A site is a critical point of the distance-to-nearest-atom field f(x) = min_i |x - a_i|. At a point p with
nearest distance d, let N be the atoms at distance d. f is not smooth, but p is a critical point exactly
when p lies in the convex hull of N (no direction increases the distance to every atom of N to first order).
The smallest face F of conv(N) that contains p fixes the type: dim F = 3 is a maximum (a Voronoi vertex, the
centre of an empty Delaunay cell); dim F = 2 is a saddle on a Delaunay face (a point where a Voronoi edge
crosses it, with one direction uphill); dim F = 1 is a saddle at the midpoint of a Delaunay edge (where the
edge crosses its Voronoi face, with two directions uphill).

Candidates are the circumcentres of the tetrahedra, triangles and edges of a Delaunay triangulation of a
periodic block of atoms around the cell; each candidate whose circumsphere is empty is tested with a small
linear programme (the largest-support convex combination of N equal to p), which is exact in degenerate cases
(FCC octahedra cut into several flat-sided tetrahedra, the SC cube, the square windows of SC) where the
triangulation itself is arbitrary. Candidates are wrapped into the cell and merged within a tolerance, so
degenerate tetrahedra sharing one circumcentre count once.

Which critical points are sites
-------------------------------
- Every maximum is a site. Its coordination polyhedron is conv(N): all atoms on the empty sphere, i.e. the
  union of the Delaunay cells sharing that circumcentre.
- A saddle on a Delaunay edge AB (dim F = 1) is a site when (a) A and B are not nearest neighbours (|AB| is
  longer than the nearest-neighbour distance, so the hole is open: a midpoint between atoms in contact has
  r = 0 and is no hole), and (b) the site is the centre of its coordination polyhedron, the union of the
  Delaunay cells around AB (the centroid of its vertices coincides with the saddle). The BCC octahedral site
  is such a saddle: it touches 2 atoms at a/2, the cells around that edge add 4 at a/sqrt(2), and it is the
  centre of that octahedron. A solute there is squeezed by two atoms only, which it pushes apart.
- A saddle on a Delaunay face (dim F = 2) is never a site: it is the narrowest point of a channel (a Voronoi
  edge) between two cages, the window a solute passes through when it jumps from one hole to the next (the
  triangles between FCC octahedral and tetrahedral sites, the square faces between SC cubes).

Families
--------
Sites are grouped by symmetry equivalence using their environment signature: the critical-point type, the
coordination polyhedron (number of vertices and sorted vertex distances with species) and the sorted
distances and species of the nearest `SIGNATURE_ATOMS` atoms. Symmetry-equivalent sites always have equal
signatures; the converse could in principle fail for homometric environments (not known to occur in the
built-ins), which would merge two families but never change the total count. This needs no space-group
analysis and works for any cell choice, origin and supercell.

The hole radius is r = d - R (largest sphere fitting without strain, hard host spheres of radius R).
This module imports numpy and scipy only (never pycalphad, xarray or matplotlib).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from solubility.errors import InputError
from solubility.geometry.critical import Block, Site, candidate_points, critical_point_at, find_cage, make_site
from solubility.geometry.limits import check_length
from solubility.geometry.structure import Structure, is_positive_number

__all__ = ["LINEAR_MISFIT_LIMIT", "SIZE_RULE_LIMIT", "Misfit", "SiteFamily", "find_sites", "misfit"]

#: solute/host radius ratio below which interstitial solution is expected (common practice, no source)
SIZE_RULE_LIMIT = 0.59
#: |misfit strain| up to which the linear-elastic (Eshelby) energy is a fair estimate. The matrix strain at the
#: hole's surface is about eps; interatomic forces depart from Hooke's law well before a strain of 0.1, where
#: the stress reaches the order of the ideal strength of a crystal (about G/10, Frenkel's estimate; common
#: practice, no source). Beyond it the energy is indicative only and may misorder sites.
LINEAR_MISFIT_LIMIT = 0.1


@dataclass(frozen=True, eq=False)
class SiteFamily:
    """A set of symmetry-equivalent interstitial sites.

    Attributes
    ----------
    kind
        Name of the coordination polyhedron: "linear" (2), "trigonal" (3), "tetrahedral" or "square planar"
        (4), "trigonal bipyramidal" or "square pyramidal" (5), "octahedral", "hexagonal" (a flat puckered
        ring, see `FLAT_RING_RATIO`) or "trigonal prismatic" (6), "cubic" (8, six quadrilateral faces) or
        "hexagonal bipyramidal" (8), else "cn{N}".
    coordination
        Number of vertices of the coordination polyhedron (BCC octahedral: 6).
    per_host_atom
        Sites per host atom (sites per conventional cell / atoms per cell).
    radius
        Hole radius r = d - R, Å (largest sphere that fits without strain). Relative (a = 1 Å nominal) when
        `absolute_scale` is False.
    radius_ratio
        r / R.
    neighbour_shells
        (distance Å, count) of the polyhedron's atoms, nearest first.
    positions
        (m, 3) fractional positions in the conventional cell, in [0, 1).
    critical_point
        "maximum" or "saddle" of the distance-to-nearest-atom field.
    distorted
        True when the polyhedron's vertices are not all at one distance.
    per_cell
        Sites per conventional cell (m).
    neighbour_species
        Species of the polyhedron's atoms, in the order of increasing distance.
    absolute_scale
        Copied from the structure: False when lengths are relative.
    """

    kind: str
    coordination: int
    per_host_atom: float
    radius: float
    radius_ratio: float
    neighbour_shells: tuple[tuple[float, int], ...]
    positions: np.ndarray
    critical_point: str
    distorted: bool
    per_cell: int = 0
    neighbour_species: tuple[str, ...] = ()
    absolute_scale: bool = True

    @property
    def per_host_atom_fraction(self) -> Fraction:
        """`per_host_atom` as an exact fraction (sites per cell / atoms per cell)."""
        return Fraction(self.per_host_atom).limit_denominator(1000)

    @property
    def neighbour_distances(self) -> tuple[float, ...]:
        """Distance of every polyhedron vertex from the site, Å, nearest first (length `coordination`)."""
        return tuple(d for d, n in self.neighbour_shells for _ in range(n))

    def __repr__(self) -> str:
        shells = ", ".join(f"{n} x {d:.4g}" for d, n in self.neighbour_shells)
        return (
            f"SiteFamily({self.kind}, CN {self.coordination}, {self.per_host_atom:g} per host atom, "
            f"r/R = {self.radius_ratio:.6f}, {self.critical_point}, shells: {shells})"
        )


def _same_family(s: Site, t: Site, tol: float) -> bool:
    return (
        s.critical.dimension == t.critical.dimension
        and s.kind == t.kind
        and len(s.distances) == len(t.distances)
        and s.cage_species == t.cage_species
        and s.env_species == t.env_species
        and bool(np.allclose(s.distances, t.distances, rtol=0, atol=tol))
        and bool(np.allclose(s.env, t.env, rtol=0, atol=tol))
    )


def _shells(distances: np.ndarray, tol: float) -> tuple[tuple[float, int], ...]:
    shells: list[list[float]] = []
    for d in distances:
        if shells and d - shells[-1][0] <= tol:
            shells[-1].append(float(d))
        else:
            shells.append([float(d)])
    return tuple((s[0], len(s)) for s in shells)  # each shell at its nearest member


def _family(structure: Structure, members: list[Site], tol: float) -> SiteFamily:
    first = members[0]
    R = structure.host_radius
    # members agree within the family tolerance; the smallest distance keeps every hole sphere empty
    radius = min(m.critical.distance for m in members) - R
    shells = _shells(first.distances, tol)
    shells = ((radius + R, shells[0][1]), *shells[1:])
    positions = np.array(sorted((np.round(m.critical.frac, 12) % 1.0).tolist() for m in members))
    return SiteFamily(
        kind=first.kind,
        coordination=len(first.cage),
        per_host_atom=len(members) / structure.atoms_per_cell,
        radius=radius,
        radius_ratio=radius / R,
        neighbour_shells=shells,
        positions=positions,
        critical_point="maximum" if first.critical.dimension == 3 else "saddle",
        distorted=len(shells) > 1,
        per_cell=len(members),
        neighbour_species=first.cage_species,
        absolute_scale=structure.absolute_scale,
    )


def find_sites(structure: Structure) -> tuple[SiteFamily, ...]:
    """Every interstitial site family of `structure`, largest hole first.

    See the module docstring for the method and for which critical points count as sites.

    Parameters
    ----------
    structure
        The host structure.

    Returns
    -------
    tuple of SiteFamily
        Sorted by decreasing hole radius (then by coordination and kind).
    """
    if not isinstance(structure, Structure):
        raise InputError(f"find_sites needs a Structure, not {type(structure).__name__}")
    block = Block(structure)
    sites: list[Site] = []
    for p in candidate_points(block):
        c = critical_point_at(block, p)
        if c is None:
            continue
        cage = find_cage(block, c)
        if cage is not None:
            sites.append(make_site(block, c, cage))
    tol = 1e-5 * block.dnn
    groups: list[list[Site]] = []
    for s in sites:
        for g in groups:
            if _same_family(g[0], s, tol):
                g.append(s)
                break
        else:
            groups.append([s])
    families = [_family(structure, g, block.tol * 10) for g in groups]
    return tuple(sorted(families, key=lambda f: (-f.radius, f.coordination, f.kind, f.positions[0].tolist())))


@dataclass(frozen=True)
class Misfit:
    """Size misfit of a solute in a hole, and an estimate of its elastic energy (isotropic continuum).

    Attributes
    ----------
    eps
        Misfit strain (r_solute - r) / r, dimensionless; positive when the solute is larger than the hole.
    size_ratio
        r_solute / R (solute over host radius), or None when R is unknown.
    fits_size_rule
        size_ratio < `SIZE_RULE_LIMIT` (0.59; common practice for interstitial solution), or None.
    energy_rigid_J
        Estimate for a rigid solute, 8 pi mu r^3 eps^2, J per solute atom (None without a shear modulus).
    energy_compressible_J
        Estimate for a compressible solute of bulk modulus K, 8 pi mu r^3 eps^2 * 3K / (3K + 4 mu), J per
        solute atom (None without both moduli).
    within_linear_range
        abs(eps) <= `LINEAR_MISFIT_LIMIT` (0.1): the linear-elastic energy is a fair estimate; outside it the
        energies are indicative only.
    """

    eps: float
    size_ratio: float | None
    fits_size_rule: bool | None
    energy_rigid_J: float | None  # noqa: N815 (the unit suffix is part of the public name)
    energy_compressible_J: float | None  # noqa: N815
    within_linear_range: bool = True

    def to_dict(self) -> dict[str, float | bool | None]:
        return {
            "eps": self.eps,
            "size_ratio": self.size_ratio,
            "fits_size_rule": self.fits_size_rule,
            "energy_rigid_J": self.energy_rigid_J,
            "energy_compressible_J": self.energy_compressible_J,
            "within_linear_range": self.within_linear_range,
            "linear_misfit_limit": LINEAR_MISFIT_LIMIT,
        }


def _check_positive(value: float | None, what: str, unit: str) -> float | None:
    if value is None:
        return None
    if not is_positive_number(value):
        raise InputError(f"{what} {value!r} is not accepted; expected a finite number of {unit} > 0")
    return float(value)


def misfit(
    family_or_radius: SiteFamily | float,
    solute_radius: float,
    *,
    host_radius: float | None = None,
    shear_modulus: float | None = None,
    solute_bulk_modulus: float | None = None,
) -> Misfit:
    """Misfit of a solute sphere in a hole, with elastic-energy estimates after Eshelby.

    A sphere of natural radius r_s = r (1 + eps) in a spherical hole of radius r in an infinite isotropic
    matrix of shear modulus mu. The matrix displacement is u = A / rho^2, which is pure shear, so the matrix
    energy is 8 pi mu A^2 / r^3 and the pressure on the interface is p = 4 mu u(r) / r.
    Rigid solute: u(r) = eps r, so E = 8 pi mu r^3 eps^2.
    Compressible solute (bulk modulus K): balancing p against the solute's pressure 3K (eps - u(r)/r) gives
    u(r)/r = 3K eps / (3K + 4 mu); adding the solute's energy 6 pi K r^3 (eps - u(r)/r)^2 gives
    E = 8 pi mu r^3 eps^2 * 3K / (3K + 4 mu), which tends to the rigid form as K -> infinity.
    (J. D. Eshelby, Solid State Physics 3 (1956) 79-144, the misfitting sphere; linear elasticity, small
    eps, the lattice treated as a continuum: an estimate, not a prediction.)

    Parameters
    ----------
    family_or_radius
        A `SiteFamily` (its r and R are used) or the hole radius r, Å.
    solute_radius
        r_s, Å (> 0).
    host_radius
        R, Å; needed for the size ratio when a bare radius is given (a family carries its own R).
    shear_modulus
        mu of the matrix, Pa (> 0).
    solute_bulk_modulus
        K of the solute, Pa (> 0).

    Returns
    -------
    Misfit
        Energies in J per solute atom (radii converted from Å to m).

    Raises
    ------
    InputError
        A value that is not a finite number > 0, a length outside `geometry.limits` (1e-3 to 1e3 Å), a hole
        radius <= 0, or a family without absolute scale.
    """
    solute_radius = check_length(solute_radius, "solute radius", error=InputError)
    mu = _check_positive(shear_modulus, "shear modulus", "Pa")
    K = _check_positive(solute_bulk_modulus, "solute bulk modulus", "Pa")
    R = None if host_radius is None else check_length(host_radius, "host radius", error=InputError)
    if isinstance(family_or_radius, SiteFamily):
        if not family_or_radius.absolute_scale:
            raise InputError("the site family has no absolute scale; give a lattice parameter or host radius")
        r = family_or_radius.radius
        if R is None and family_or_radius.radius_ratio > 0:
            R = r / family_or_radius.radius_ratio
    else:
        r = family_or_radius
    r = check_length(r, "hole radius", error=InputError)
    eps = (float(solute_radius) - r) / r
    size_ratio = None if R is None else float(solute_radius) / R
    fits = None if size_ratio is None else size_ratio < SIZE_RULE_LIMIT
    rigid = None if mu is None else 8.0 * math.pi * mu * (r * 1e-10) ** 3 * eps**2
    compressible = None
    if rigid is not None and K is not None and mu is not None:
        compressible = rigid * 3.0 * K / (3.0 * K + 4.0 * mu)
    return Misfit(eps, size_ratio, fits, rigid, compressible, abs(eps) <= LINEAR_MISFIT_LIMIT)
