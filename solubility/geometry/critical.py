"""The machinery of the site finder: a periodic block of atoms, its Delaunay triangulation, the critical points
of the distance-to-nearest-atom field and their coordination cages (the method is described in
`solubility.geometry.sites`, which groups the sites found here into families).

This module imports numpy and scipy only.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

import numpy as np
from scipy.spatial import ConvexHull, Delaunay, QhullError, cKDTree

from solubility.errors import StructureError
from solubility.geometry.lattice import cell_diagonal, periodic_images
from solubility.geometry.structure import Structure

__all__ = [
    "DIST_TOL",
    "FLAT_RING_RATIO",
    "FRAC_TOL",
    "SIGNATURE_ATOMS",
    "Block",
    "Critical",
    "Site",
    "candidate_points",
    "critical_point_at",
    "find_cage",
    "make_site",
]

#: distances equal within this fraction of the nearest-neighbour distance are taken as equal
DIST_TOL = 1e-6
#: fractional-coordinate tolerance for merging candidate positions
FRAC_TOL = 1e-7
#: number of nearest atoms in the environment signature used to group sites into families
SIGNATURE_ATOMS = 24
#: an octahedron thinner than this (smallest / largest singular value of its centred vertices) is a puckered
#: hexagonal ring and is called "hexagonal" (diamond's H site: 0.25; a regular octahedron: 1)
FLAT_RING_RATIO = 0.5


@dataclass(frozen=True)
class Critical:
    """A critical point of the distance field, in the home cell."""

    point: np.ndarray  # Cartesian, Å
    frac: np.ndarray  # fractional, wrapped
    distance: float  # to the nearest atom, Å
    dimension: int  # dim of the smallest face of conv(N) containing the point: 3 max, 2 or 1 saddle
    support: tuple[int, ...]  # block-atom indices of that face
    touching: tuple[int, ...]  # block-atom indices at the nearest distance


class Block:
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


def candidate_points(block: Block) -> np.ndarray:
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


def critical_point_at(block: Block, p: np.ndarray) -> Critical | None:
    d = float(block.nearest(p))
    touching = np.array(sorted(block.tree.query_ball_point(p, d + block.tol)))
    vectors = (block.points[touching] - p) / d
    face = _smallest_face(vectors)
    if face is None:
        return None
    sv = np.linalg.svd(vectors[face], compute_uv=False)
    dim = int(np.sum(sv > 1e-6 * sv[0]))
    frac = _wrap(block.to_frac(p)[None, :])[0]
    return Critical(p, frac, d, dim, tuple(int(i) for i in touching[face]), tuple(int(i) for i in touching))


def _edge_cage(block: Block, a: int, b: int) -> np.ndarray:
    """Block-atom indices of the union of the Delaunay cells around edge ab (cospherical atoms included)."""
    around = np.any(block.tets == a, axis=1) & np.any(block.tets == b, axis=1)
    atoms = set(block.tets[around].ravel().tolist())
    for centre, radius in zip(block.tet_centres[around], block.tet_radii[around], strict=True):
        if np.all(np.isfinite(centre)):
            atoms.update(block.tree.query_ball_point(centre, radius + block.tol))
    return np.array(sorted(atoms))


def find_cage(block: Block, c: Critical) -> np.ndarray | None:
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
class Site:
    critical: Critical
    cage: np.ndarray
    distances: np.ndarray  # sorted cage distances, Å
    cage_species: tuple[str, ...]
    env: np.ndarray  # distances of the SIGNATURE_ATOMS nearest atoms, Å
    env_species: tuple[str, ...]
    kind: str


def make_site(block: Block, c: Critical, cage: np.ndarray) -> Site:
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
    return Site(c, cage, distances, cage_species, env, env_species, kind)
