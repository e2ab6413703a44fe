"""Host structures: lattice vectors (Å), a basis of host atoms (fractional coordinates) and the host radius R.

Built-ins (conventional cells): ``fcc``, ``bcc``, ``hcp`` (any c/a > 0, ideal sqrt(8/3) by default),
``sc`` (simple cubic) and ``diamond``. Any other lattice comes from a small TOML structure file (see
`read_structure`).

Scale: a built-in needs a lattice parameter or a host radius R to have an absolute size. Without either it is
built with a = 1 Å and flagged ``absolute_scale=False``; ratios (r/R) are then meaningful, lengths are not.
A structure file always gives its lattice in Å.

All host atoms are treated as hard spheres of one radius R (the species labels only tell site families apart).
This module imports numpy only.
"""

from __future__ import annotations

import math
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from solubility.errors import StructureError
from solubility.geometry.lattice import SHIFTS, nearest_neighbour_distance
from solubility.geometry.limits import check_atom_count, check_c_over_a, check_lattice, check_length

__all__ = [
    "BUILTIN_NAMES",
    "IDEAL_C_OVER_A",
    "Structure",
    "builtin_structure",
    "load_structure",
    "read_structure",
]

BUILTIN_NAMES = ("fcc", "bcc", "hcp", "sc", "diamond")

#: ideal c/a of hexagonal close packing, sqrt(8/3)
IDEAL_C_OVER_A = math.sqrt(8.0 / 3.0)

#: two atoms closer than this fraction of the length (volume per atom)**(1/3) are taken to overlap
MIN_SEPARATION_FRACTION = 0.05

#: a lattice whose |det| is below this fraction of the product of its vector lengths is singular
SINGULAR_FRACTION = 1e-6


def _as_float_array(value: Any, shape_text: str, what: str) -> np.ndarray:
    """Convert `value` to a float array, refusing strings, booleans and other non-numbers."""

    def check(v: Any) -> None:
        if isinstance(v, list | tuple | np.ndarray):
            for item in v:
                check(item)
        elif isinstance(v, bool) or not isinstance(v, int | float | np.integer | np.floating):
            raise StructureError(f"{what} contains {v!r}, which is not a number; expected {shape_text}")

    check(value)
    try:
        arr = np.array(value, dtype=float)
    except ValueError:
        raise StructureError(f"{what} is ragged; expected {shape_text}") from None
    if not np.all(np.isfinite(arr)):
        raise StructureError(f"{what} contains NaN or infinity; expected finite numbers ({shape_text})")
    return arr


@dataclass(frozen=True, eq=False)
class Structure:
    """A periodic host structure.

    Attributes
    ----------
    name
        ``"fcc"``, ``"bcc"``, ``"hcp"``, ``"sc"``, ``"diamond"`` or the name of the structure file.
    lattice
        (3, 3) array, rows are the lattice vectors of the conventional cell, Å.
    basis
        (n, 3) fractional coordinates of the host atoms, wrapped into [0, 1).
    species
        One host species label per basis atom (default ``"M"``).
    given_host_radius
        Host radius R given by the user, Å, or None (then R is half the nearest-neighbour distance).
    absolute_scale
        False for a built-in made without lattice parameter or host radius (a = 1 Å nominal): lengths are
        then relative and only ratios are meaningful.

    Raises
    ------
    StructureError
        Singular lattice, empty basis, overlapping atoms, non-numbers, NaN, a host radius <= 0.
    """

    name: str
    lattice: np.ndarray
    basis: np.ndarray
    species: tuple[str, ...] = ()
    given_host_radius: float | None = None
    absolute_scale: bool = True
    _nn: float = field(default=math.nan, init=False, repr=False)

    def __post_init__(self) -> None:
        lattice = _as_float_array(self.lattice, "3 lattice vectors of 3 numbers (Å)", "lattice")
        if lattice.shape != (3, 3):
            raise StructureError(f"lattice has shape {lattice.shape}; expected 3 vectors of 3 numbers (Å)")
        check_lattice(lattice)  # lengths, angles, aspect ratio (geometry.limits); before any product overflows
        lengths = np.linalg.norm(lattice, axis=1)
        det = float(np.linalg.det(lattice))
        if np.any(lengths == 0) or abs(det) < SINGULAR_FRACTION * float(np.prod(lengths)):
            raise StructureError(
                f"lattice vectors {lattice.tolist()} are singular (volume {abs(det):.3g} Å^3); "
                "give three linearly independent vectors"
            )
        basis = _as_float_array(self.basis, "a list of fractional positions [x, y, z]", "basis")
        if basis.size == 0:
            raise StructureError("the basis is empty; give at least one host atom position")
        if basis.ndim != 2 or basis.shape[1] != 3:
            raise StructureError(f"basis has shape {basis.shape}; expected positions of 3 fractional numbers")
        check_atom_count(len(basis))
        basis = basis - np.floor(basis)
        basis[basis >= 1.0] = 0.0
        species = tuple(self.species) if self.species else ("M",) * len(basis)
        if len(species) != len(basis) or not all(isinstance(s, str) and s for s in species):
            raise StructureError(
                f"species {list(species)!r} must be {len(basis)} non-empty labels, one per basis atom"
            )
        if self.given_host_radius is not None:
            check_length(self.given_host_radius, "host radius")
        self._check_overlap(lattice, basis, abs(det))
        lattice.setflags(write=False)
        basis.setflags(write=False)
        object.__setattr__(self, "lattice", lattice)
        object.__setattr__(self, "basis", basis)
        object.__setattr__(self, "species", species)
        object.__setattr__(self, "_nn", nearest_neighbour_distance(lattice, basis))

    @staticmethod
    def _check_overlap(lattice: np.ndarray, basis: np.ndarray, volume: float) -> None:
        limit = MIN_SEPARATION_FRACTION * (volume / len(basis)) ** (1.0 / 3.0)
        for i in range(len(basis)):
            for j in range(i + 1, len(basis)):
                diff = basis[j] - basis[i]
                diff -= np.round(diff)
                d = float(np.min(np.linalg.norm((diff + SHIFTS) @ lattice, axis=1)))
                if d < limit:
                    raise StructureError(
                        f"atoms {i + 1} at {basis[i].tolist()} and {j + 1} at {basis[j].tolist()} overlap "
                        f"(distance {d:.3g} Å, less than {limit:.3g} Å); give distinct positions"
                    )

    @property
    def nearest_neighbour_distance(self) -> float:
        """Shortest distance between two host atom centres, Å."""
        return self._nn

    @property
    def host_radius(self) -> float:
        """Host radius R, Å: the given R, else half the nearest-neighbour distance (spheres in contact)."""
        return self.given_host_radius if self.given_host_radius is not None else self._nn / 2.0

    @property
    def atoms_per_cell(self) -> int:
        """Number of host atoms in the (conventional) cell."""
        return len(self.basis)

    @property
    def volume(self) -> float:
        """Cell volume, Å^3."""
        return float(abs(np.linalg.det(self.lattice)))

    def __repr__(self) -> str:
        scale = "" if self.absolute_scale else ", relative scale"
        return (
            f"Structure({self.name!r}, {self.atoms_per_cell} atoms per cell, "
            f"R = {self.host_radius:.4g} Å{scale})"
        )


def is_positive_number(value: Any) -> bool:
    """True for a finite int or float > 0 (booleans, strings and NaN are not numbers here)."""
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        return False
    return bool(math.isfinite(value) and value > 0)


def _positive(value: Any, what: str, accepted: str) -> float:
    if not is_positive_number(value):
        raise StructureError(f"{what} {value!r} is not accepted; expected {accepted}")
    return float(value)


def _builtin_cell(name: str, c_over_a: float) -> tuple[np.ndarray, np.ndarray]:
    """Lattice (a = 1) and basis of a built-in conventional cell."""
    cubic = np.eye(3)
    fcc = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])
    if name == "fcc":
        return cubic, fcc
    if name == "bcc":
        return cubic, np.array([[0, 0, 0], [0.5, 0.5, 0.5]])
    if name == "sc":
        return cubic, np.zeros((1, 3))
    if name == "diamond":
        return cubic, np.vstack([fcc, fcc + 0.25])
    # hcp: a1 = a x, a2 = a (-1/2, sqrt(3)/2, 0), a3 = c z; atoms at (1/3, 2/3, 1/4), (2/3, 1/3, 3/4)
    lattice = np.array([[1.0, 0, 0], [-0.5, math.sqrt(3) / 2, 0], [0, 0, c_over_a]])
    return lattice, np.array([[1 / 3, 2 / 3, 0.25], [2 / 3, 1 / 3, 0.75]])


def builtin_structure(
    name: str,
    *,
    c_over_a: float | None = None,
    lattice_parameter: float | None = None,
    host_radius: float | None = None,
) -> Structure:
    """A built-in host structure in its conventional cell.

    Parameters
    ----------
    name
        One of `BUILTIN_NAMES` (case-insensitive).
    c_over_a
        hcp only: axial ratio c/a > 0 (default ideal sqrt(8/3)).
    lattice_parameter
        a, Å (> 0). For hcp the basal parameter a.
    host_radius
        R, Å (> 0). Without a lattice parameter it sets the scale (spheres in contact, nearest-neighbour
        distance 2R); with one it is taken as given.

    Without `lattice_parameter` and `host_radius` the cell is built with a = 1 Å and ``absolute_scale=False``.

    Raises
    ------
    StructureError
        Unknown name, c/a given for a non-hcp structure, or a value that is not a finite number > 0.
    """
    key = str(name).strip().lower()
    if key not in BUILTIN_NAMES:
        raise StructureError(f"unknown built-in structure {name!r}; choose one of {', '.join(BUILTIN_NAMES)}")
    if c_over_a is not None and key != "hcp":
        raise StructureError(f"c/a = {c_over_a!r} applies to hcp only, not to {key}")
    ratio = IDEAL_C_OVER_A if c_over_a is None else check_c_over_a(c_over_a)
    lattice, basis = _builtin_cell(key, ratio)
    unit = Structure(key, lattice, basis, absolute_scale=False)
    if lattice_parameter is not None:
        a = check_length(lattice_parameter, "lattice parameter")
    elif host_radius is not None:
        r = check_length(host_radius, "host radius")
        a = 2.0 * r / unit.nearest_neighbour_distance
    else:
        return unit
    given = None if host_radius is None else check_length(host_radius, "host radius")
    return Structure(key, lattice * a, basis, given_host_radius=given)


_FILE_KEYS = {"name", "lattice", "cell", "host_radius", "atoms", "comment"}
_CELL_KEYS = {"a", "b", "c", "alpha", "beta", "gamma"}


def _cell_to_lattice(cell: Any, path: str) -> np.ndarray:
    """Lattice vectors from lengths (Å) and angles (degrees): a along x, b in the xy plane."""
    if not isinstance(cell, dict) or set(cell) != _CELL_KEYS:
        raise StructureError(f"{path}: 'cell' must have exactly the keys a, b, c, alpha, beta, gamma")
    vals = {k: _positive(cell[k], f"{path}: cell {k}", "a finite number > 0") for k in _CELL_KEYS}
    for k in "abc":
        check_length(vals[k], f"{path}: cell {k}")
    for k in ("alpha", "beta", "gamma"):
        if not 0 < vals[k] < 180:
            raise StructureError(f"{path}: cell {k} = {vals[k]} degrees is impossible; give 0 < angle < 180")
    al, be, ga = (math.radians(vals[k]) for k in ("alpha", "beta", "gamma"))
    a, b, c = vals["a"], vals["b"], vals["c"]
    cx = c * math.cos(be)
    cy = c * (math.cos(al) - math.cos(be) * math.cos(ga)) / math.sin(ga)
    cz2 = c * c - cx * cx - cy * cy
    if cz2 <= 0:
        angles = f"{vals['alpha']}, {vals['beta']}, {vals['gamma']}"
        raise StructureError(f"{path}: cell angles {angles} degrees are impossible for a cell")
    return np.array([[a, 0, 0], [b * math.cos(ga), b * math.sin(ga), 0], [cx, cy, math.sqrt(cz2)]])


def read_structure(path: str | os.PathLike) -> Structure:
    """Read a structure file (TOML).

    Format::

        name = "B2"                        # optional; default: the file name without extension
        host_radius = 1.25                 # optional, Å; default half the nearest-neighbour distance
        lattice = [[2.9, 0, 0], [0, 2.9, 0], [0, 0, 2.9]]   # rows are lattice vectors, Å
        # or instead of lattice:  cell = {a = 2.9, b = 2.9, c = 2.9, alpha = 90, beta = 90, gamma = 90}
        atoms = [
            {species = "Fe", position = [0, 0, 0]},       # fractional coordinates
            {species = "Al", position = [0.5, 0.5, 0.5]},
        ]

    ``species`` is optional (default ``"M"``). Unknown keys are errors (they are usually typos).

    Raises
    ------
    StructureError
        Missing file, invalid TOML, unknown or missing keys, and every check of `Structure`.
    """
    p = Path(path)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise StructureError(f"structure file {str(p)!r} does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise StructureError(f"structure file {str(p)!r} cannot be read: {exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise StructureError(f"structure file {str(p)!r} is not valid TOML: {exc}") from None
    where = str(p)
    unknown = set(data) - _FILE_KEYS
    if unknown:
        raise StructureError(
            f"{where}: unknown key(s) {', '.join(sorted(unknown))}; accepted: {', '.join(sorted(_FILE_KEYS))}"
        )
    if ("lattice" in data) == ("cell" in data):
        raise StructureError(
            f"{where}: give exactly one of 'lattice' (3 vectors, Å) or 'cell' (lengths Å, angles degrees)"
        )
    lattice = data["lattice"] if "lattice" in data else _cell_to_lattice(data["cell"], where)
    atoms = data.get("atoms")
    if not isinstance(atoms, list) or not atoms:
        raise StructureError(f"{where}: 'atoms' must be a non-empty list of {{species, position}} tables")
    basis, species = [], []
    for k, atom in enumerate(atoms, start=1):
        if not isinstance(atom, dict) or "position" not in atom or set(atom) - {"species", "position"}:
            raise StructureError(f"{where}: atom {k} must be a table with 'position' and optional 'species'")
        basis.append(atom["position"])
        species.append(str(atom.get("species", "M")))
    name = data.get("name", p.stem)
    if not isinstance(name, str) or not name:
        raise StructureError(f"{where}: name {name!r} must be a non-empty string")
    try:
        return Structure(name, lattice, basis, tuple(species), given_host_radius=data.get("host_radius"))
    except StructureError as exc:
        raise StructureError(f"{where}: {exc}") from None


def load_structure(
    spec: str | os.PathLike,
    *,
    c_over_a: float | None = None,
    lattice_parameter: float | None = None,
    host_radius: float | None = None,
) -> Structure:
    """A built-in by name (see `builtin_structure`) or a structure file by path (see `read_structure`).

    For a file, `host_radius` replaces the file's R; `c_over_a` and `lattice_parameter` are refused (the file
    gives its lattice in Å).
    """
    text = os.fspath(spec)
    if text.strip().lower() in BUILTIN_NAMES:
        return builtin_structure(
            text, c_over_a=c_over_a, lattice_parameter=lattice_parameter, host_radius=host_radius
        )
    p = Path(text)
    if not p.is_file():
        raise StructureError(
            f"structure {text!r} is neither a built-in ({', '.join(BUILTIN_NAMES)}) nor an existing file"
        )
    if c_over_a is not None or lattice_parameter is not None:
        raise StructureError(
            f"c/a and lattice parameter apply to built-ins only; {text!r} gives its lattice in Å"
        )
    s = read_structure(p)
    if host_radius is None:
        return s
    r = check_length(host_radius, "host radius")
    return Structure(s.name, s.lattice.copy(), s.basis.copy(), s.species, given_host_radius=r)
