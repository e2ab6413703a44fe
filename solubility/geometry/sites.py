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
from itertools import combinations

import numpy as np
from scipy.spatial import ConvexHull, Delaunay, QhullError, cKDTree

from solubility.errors import InputError, StructureError
from solubility.geometry.structure import Structure, cell_diagonal, is_positive_number, periodic_images

__all__ = ["LINEAR_MISFIT_LIMIT", "SIZE_RULE_LIMIT", "Misfit", "SiteFamily", "find_sites", "misfit"]

#: distances equal within this fraction of the nearest-neighbour distance are taken as equal
DIST_TOL = 1e-6
#: fractional-coordinate tolerance for merging candidate positions
FRAC_TOL = 1e-7
#: number of nearest atoms in the environment signature used to group sites into families
SIGNATURE_ATOMS = 24
#: an octahedron thinner than this (smallest / largest singular value of its centred vertices) is a puckered
#: hexagonal ring and is called "hexagonal" (diamond's H site: 0.25; a regular octahedron: 1)
FLAT_RING_RATIO = 0.5
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


@dataclass(frozen=True)
class _Critical:
    """A critical point of the distance field, in the home cell."""

    point: np.ndarray  # Cartesian, Å
    frac: np.ndarray  # fractional, wrapped
    distance: float  # to the nearest atom, Å
    dimension: int  # dim of the smallest face of conv(N) containing the point: 3 max, 2 or 1 saddle
    support: tuple[int, ...]  # block-atom indices of that face
    touching: tuple[int, ...]  # block-atom indices at the nearest distance


class _Block:
    """A periodic block of atoms around the home cell with its Delaunay triangulation."""

    def __init__(self, structure: Structure):
        self.structure = structure
        self.lattice = structure.lattice
        self.inv = np.linalg.inv(structure.lattice)
        self.dnn = structure.nearest_neighbour_distance
        self.tol = DIST_TOL * self.dnn
        # Any empty sphere has radius <= D/2 (D = longest cell diagonal), so atoms within D/2 of the cell
        # decide every candidate. The cells around a saddle's edge have centres within 2 rho_max of it and
        # spheres reaching 3 rho_max (rho_max = largest empty sphere): rebuild wider if that is further.
        self._build(0.5 * cell_diagonal(self.lattice) + self.dnn)
        self.rho_max = self.largest_empty_radius()
        reach = 3.0 * self.rho_max + self.dnn
        if reach > self.margin:
            self._build(reach)

    def _build(self, margin: float) -> None:
        self.margin = margin
        self.points, atom_index, _ = periodic_images(self.lattice, self.structure.basis, margin)
        self.species = [self.structure.species[i] for i in atom_index]
        self.tree = cKDTree(self.points)
        try:
            self.delaunay = Delaunay(self.points)
        except QhullError as exc:  # pragma: no cover - a valid periodic block is never degenerate as a whole
            raise StructureError(f"Delaunay triangulation of {self.structure.name!r} failed: {exc}") from None
        self.tets = self.delaunay.simplices
        self.tet_centres, self.tet_radii = _tet_circumcentres(self.points, self.tets)

    def in_home(self, cart: np.ndarray, pad: float = 0.0) -> np.ndarray:
        """Mask of points within the home cell widened by `pad` Å on each side."""
        frac = self.to_frac(cart)
        m = pad * np.linalg.norm(self.inv.T, axis=1) + FRAC_TOL
        return np.all((frac > -m) & (frac < 1 + m), axis=1)

    def largest_empty_radius(self) -> float:
        """Largest empty-sphere radius among the Delaunay cells centred in the home cell, Å."""
        ok = np.all(np.isfinite(self.tet_centres), axis=1)
        ok[ok] &= self.in_home(self.tet_centres[ok])
        radii = self.tet_radii[ok]
        empty = self.nearest(self.tet_centres[ok]) > radii - self.tol
        return float(np.max(radii[empty]))

    def to_frac(self, cart: np.ndarray) -> np.ndarray:
        return cart @ self.inv

    def nearest(self, cart: np.ndarray) -> np.ndarray:
        return self.tree.query(cart, k=1)[0]


def _tet_circumcentres(points: np.ndarray, tets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Circumcentres and radii of tetrahedra; NaN for flat ones (degenerate slivers of cospherical sets)."""
    a = points[tets[:, 0]]
    m = points[tets[:, 1:]] - a[:, None, :]
    rhs = 0.5 * np.sum(m * m, axis=2)
    det = np.linalg.det(m)
    scale = np.max(np.linalg.norm(m, axis=2), axis=1) ** 3
    ok = np.abs(det) > 1e-9 * scale
    centres = np.full(a.shape, np.nan)
    centres[ok] = a[ok] + np.linalg.solve(m[ok], rhs[ok][:, :, None])[:, :, 0]
    radii = np.linalg.norm(centres - a, axis=1)
    return centres, radii


def _triangle_circumcentres(points: np.ndarray, tris: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    c = points[tris[:, 2]]
    a = points[tris[:, 0]] - c
    b = points[tris[:, 1]] - c
    axb = np.cross(a, b)
    n2 = np.sum(axb * axb, axis=1)
    ok = n2 > 1e-18 * np.max(np.sum(a * a, axis=1)) ** 2
    num = np.cross(np.sum(a * a, 1)[:, None] * b - np.sum(b * b, 1)[:, None] * a, axb)
    centres = np.full(a.shape, np.nan)
    centres[ok] = c[ok] + num[ok] / (2.0 * n2[ok, None])
    return centres, np.linalg.norm(centres - c, axis=1)


def _candidates(block: _Block) -> np.ndarray:
    """Cartesian candidate points in the home cell with empty circumspheres (one per merged position)."""
    # a simplex whose circumcentre is in the cell has its vertices within rho_max of the cell
    near = block.in_home(block.points, pad=block.rho_max + block.tol)
    tets = block.tets[np.any(near[block.tets], axis=1)]
    tris = _unique_rows(tets[:, list(combinations(range(4), 3))].reshape(-1, 3))
    edges = _unique_rows(tets[:, list(combinations(range(4), 2))].reshape(-1, 2))
    tri_c, tri_r = _triangle_circumcentres(block.points, tris)
    edge_c = 0.5 * (block.points[edges[:, 0]] + block.points[edges[:, 1]])
    edge_r = 0.5 * np.linalg.norm(block.points[edges[:, 0]] - block.points[edges[:, 1]], axis=1)
    cart = np.vstack([block.tet_centres, tri_c, edge_c])
    radius = np.concatenate([block.tet_radii, tri_r, edge_r])
    good = np.all(np.isfinite(cart), axis=1)
    cart, radius = cart[good], radius[good]
    home = block.in_home(cart)
    cart, radius = cart[home], radius[home]
    empty = block.nearest(cart) > radius - block.tol
    cart = cart[empty]
    frac = _wrap(block.to_frac(cart))
    tree = cKDTree(frac, boxsize=1.0)
    label = _cluster(len(frac), tree.query_pairs(FRAC_TOL, output_type="ndarray"))
    _, first = np.unique(label, return_index=True)
    return cart[np.sort(first)]


def _unique_rows(rows: np.ndarray) -> np.ndarray:
    """Unique rows of a small-integer array, each row sorted first."""
    rows = np.sort(rows, axis=1)
    base = int(rows.max()) + 1
    keys = np.zeros(len(rows), dtype=np.int64)
    for col in range(rows.shape[1]):
        keys = keys * base + rows[:, col]
    _, first = np.unique(keys, return_index=True)
    return rows[first]


def _wrap(frac: np.ndarray) -> np.ndarray:
    f = frac - np.floor(frac)
    f[(f >= 1.0 - FRAC_TOL / 10) | (f < 0)] = 0.0
    return f


def _cluster(n: int, pairs: np.ndarray) -> np.ndarray:
    """Connected components (union-find) of `n` items joined by `pairs`."""
    parent = np.arange(n)

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in pairs:
        ri, rj = root(int(i)), root(int(j))
        if ri != rj:
            parent[max(ri, rj)] = min(ri, rj)
    return np.array([root(i) for i in range(n)])


def _smallest_face(vectors: np.ndarray) -> np.ndarray | None:
    """Indices of the atoms in the smallest face of conv(N) that contains p, or None if p is outside.

    `vectors` are the unit vectors from p to the atoms of N. Solves: maximise sum(l) subject to
    0 <= l_i <= 1 and |sum_i l_i v_i| <= eps sum(l) componentwise. Any atom with positive weight in some
    convex combination equal to p gets positive weight at the optimum (sums of solutions are solutions), so
    the support of the optimum is exactly the smallest face.
    """
    n = len(vectors)
    if n == 2:
        return np.arange(2) if np.linalg.norm(vectors.sum(axis=0)) < 1e-7 else None
    if n <= 4:
        system = np.vstack([vectors.T, np.ones(n)])
        if np.linalg.matrix_rank(system, tol=1e-9) == n:  # the convex combination is unique
            weights = np.linalg.lstsq(system, np.array([0.0, 0.0, 0.0, 1.0]), rcond=None)[0]
            if np.linalg.norm(system @ weights - [0.0, 0.0, 0.0, 1.0]) > 1e-7 or np.any(weights < -1e-7):
                return None
            return np.flatnonzero(weights > 1e-7)
    from scipy.optimize import linprog  # only degenerate cases need it; importing it costs about a second

    eps = 1e-9
    a_ub = np.vstack([vectors.T - eps, -vectors.T - eps])
    res = linprog(-np.ones(n), A_ub=a_ub, b_ub=np.zeros(6), bounds=[(0.0, 1.0)] * n, method="highs")
    if res.status != 0 or -res.fun < 1e-6:
        return None
    return np.flatnonzero(res.x > 1e-5)


def _critical_point(block: _Block, p: np.ndarray) -> _Critical | None:
    d = float(block.nearest(p))
    touching = np.array(sorted(block.tree.query_ball_point(p, d + block.tol)))
    vectors = (block.points[touching] - p) / d
    face = _smallest_face(vectors)
    if face is None:
        return None
    sv = np.linalg.svd(vectors[face], compute_uv=False)
    dim = int(np.sum(sv > 1e-6 * sv[0]))
    frac = _wrap(block.to_frac(p)[None, :])[0]
    return _Critical(p, frac, d, dim, tuple(int(i) for i in touching[face]), tuple(int(i) for i in touching))


def _edge_cage(block: _Block, a: int, b: int) -> np.ndarray:
    """Block-atom indices of the union of the Delaunay cells around edge ab (cospherical atoms included)."""
    around = np.any(block.tets == a, axis=1) & np.any(block.tets == b, axis=1)
    atoms = set(block.tets[around].ravel().tolist())
    for centre, radius in zip(block.tet_centres[around], block.tet_radii[around], strict=True):
        if np.all(np.isfinite(centre)):
            atoms.update(block.tree.query_ball_point(centre, radius + block.tol))
    return np.array(sorted(atoms))


def _cage(block: _Block, c: _Critical) -> np.ndarray | None:
    """Block-atom indices of the coordination polyhedron, or None if the critical point is not a site."""
    if c.dimension == 3:
        return np.array(c.touching)
    if c.dimension != 1:
        return None  # a window between two cages (see the module docstring)
    a, b = c.support
    if np.linalg.norm(block.points[a] - block.points[b]) <= block.dnn + block.tol:
        return None  # midpoint between atoms in contact: no hole
    cage = _edge_cage(block, a, b)
    if np.linalg.norm(block.points[cage].mean(axis=0) - c.point) > block.tol:
        return None  # not the centre of its polyhedron
    axis = (block.points[b] - block.points[a]) / np.linalg.norm(block.points[b] - block.points[a])
    ring = block.points[[i for i in cage if i not in (a, b)]] - c.point
    if np.max(np.abs(ring @ axis)) > block.tol:
        return None  # a puckered ring: a pinch between cages, not the centre of a bipyramid
    return cage


def _kind(vertices: np.ndarray) -> str:
    """Name of the coordination polyhedron from its number of vertices and its faces."""
    n = len(vertices)
    if n == 2:
        return "linear"
    if n == 3:
        return "trigonal"
    centred = vertices - vertices.mean(axis=0)
    if np.linalg.svd(centred, compute_uv=False)[-1] < 1e-6 * np.abs(centred).max():
        return "square planar" if n == 4 else f"cn{n}"
    faces = _faces(vertices)
    sizes = sorted(len(f) for f in faces)
    if n == 4:
        return "tetrahedral"
    if n == 5 and sizes == [3] * 6:
        return "trigonal bipyramidal"
    if n == 5 and sizes == [3, 3, 3, 3, 4]:
        return "square pyramidal"
    if n == 6 and sizes == [3] * 8:
        sv = np.linalg.svd(centred, compute_uv=False)
        return "hexagonal" if sv[-1] < FLAT_RING_RATIO * sv[0] else "octahedral"
    if n == 6 and sizes == [3, 3, 4, 4, 4]:
        return "trigonal prismatic"
    if n == 8 and sizes == [4] * 6:
        return "cubic"
    if n == 8 and sizes == [3] * 12 and max(sum(v in f for f in faces) for v in range(n)) == 6:
        return "hexagonal bipyramidal"
    return f"cn{n}"


def _faces(vertices: np.ndarray) -> list[set[int]]:
    """Faces of the convex hull as vertex sets, coplanar triangles merged."""
    hull = ConvexHull(vertices)
    scale = np.abs(vertices).max()
    faces: list[tuple[np.ndarray, set[int]]] = []
    for simplex, eq in zip(hull.simplices, hull.equations, strict=True):
        for normal, members in faces:
            if np.allclose(normal, eq, atol=1e-6 * max(scale, 1.0)):
                members.update(simplex.tolist())
                break
        else:
            faces.append((eq, set(simplex.tolist())))
    return [members for _, members in faces]


@dataclass(frozen=True)
class _Site:
    critical: _Critical
    cage: np.ndarray
    distances: np.ndarray  # sorted cage distances, Å
    cage_species: tuple[str, ...]
    env: np.ndarray  # distances of the SIGNATURE_ATOMS nearest atoms, Å
    env_species: tuple[str, ...]
    kind: str


def _site(block: _Block, c: _Critical, cage: np.ndarray) -> _Site:
    def sorted_env(idx: np.ndarray) -> tuple[np.ndarray, tuple[str, ...]]:
        dist = np.linalg.norm(block.points[idx] - c.point, axis=1)
        order = sorted(range(len(idx)), key=lambda k: (round(dist[k] / block.dnn, 7), block.species[idx[k]]))
        return dist[order], tuple(block.species[idx[k]] for k in order)

    distances, cage_species = sorted_env(cage)
    # complete shells out to the SIGNATURE_ATOMS-th nearest atom (ties at the cut are all kept)
    dist, _ = block.tree.query(c.point, k=SIGNATURE_ATOMS)
    near = np.array(sorted(block.tree.query_ball_point(c.point, float(dist[-1]) + block.tol)))
    env, env_species = sorted_env(near)
    kind = _kind(block.points[cage] - c.point)
    return _Site(c, cage, distances, cage_species, env, env_species, kind)


def _same_family(s: _Site, t: _Site, tol: float) -> bool:
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


def _family(structure: Structure, members: list[_Site], tol: float) -> SiteFamily:
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
    block = _Block(structure)
    sites: list[_Site] = []
    for p in _candidates(block):
        c = _critical_point(block, p)
        if c is None:
            continue
        cage = _cage(block, c)
        if cage is not None:
            sites.append(_site(block, c, cage))
    tol = 1e-5 * block.dnn
    groups: list[list[_Site]] = []
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
        A value that is not a finite number > 0, a hole radius <= 0, or a family without absolute scale.
    """
    if _check_positive(solute_radius, "solute radius", "Å") is None:
        raise InputError("solute radius None is not accepted; expected a finite number of Å > 0")
    mu = _check_positive(shear_modulus, "shear modulus", "Pa")
    K = _check_positive(solute_bulk_modulus, "solute bulk modulus", "Pa")
    R = _check_positive(host_radius, "host radius", "Å")
    if isinstance(family_or_radius, SiteFamily):
        if not family_or_radius.absolute_scale:
            raise InputError("the site family has no absolute scale; give a lattice parameter or host radius")
        r = family_or_radius.radius
        if R is None and family_or_radius.radius_ratio > 0:
            R = r / family_or_radius.radius_ratio
    else:
        r = family_or_radius
    if not is_positive_number(r):
        raise InputError(f"hole radius {r!r} is not accepted; expected a finite number of Å > 0")
    eps = (float(solute_radius) - r) / r
    size_ratio = None if R is None else float(solute_radius) / R
    fits = None if size_ratio is None else size_ratio < SIZE_RULE_LIMIT
    rigid = None if mu is None else 8.0 * math.pi * mu * (r * 1e-10) ** 3 * eps**2
    compressible = None
    if rigid is not None and K is not None and mu is not None:
        compressible = rigid * 3.0 * K / (3.0 * K + 4.0 * mu)
    return Misfit(eps, size_ratio, fits, rigid, compressible, abs(eps) <= LINEAR_MISFIT_LIMIT)
