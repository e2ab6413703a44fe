"""Periodic lattice arithmetic shared by structures and the site finder: images, cell diagonal, neighbours.

This module imports numpy only.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["SHIFTS", "cell_diagonal", "nearest_neighbour_distance", "periodic_images"]


#: the 27 neighbouring cell translations
SHIFTS = np.stack(np.meshgrid(*[np.arange(-1, 2)] * 3, indexing="ij"), -1).reshape(-1, 3)


def _image_ranges(lattice: np.ndarray, radius: float) -> list[np.ndarray]:
    """Integer translations per axis so that every point within `radius` (Å) of the home cell is covered.

    Moving a Cartesian distance ρ changes fractional coordinate i by at most ρ |b_i| (b_i = reciprocal vector
    without the 2π), so ``ceil(radius |b_i|)`` extra cells on each side suffice.
    """
    recip = np.linalg.inv(lattice).T
    n = np.ceil(radius * np.linalg.norm(recip, axis=1)).astype(int)
    return [np.arange(-k, k + 1) for k in n]


def cell_diagonal(lattice: np.ndarray) -> float:
    """Longest body diagonal |±a1 ± a2 + a3| of the cell (Å); any point lies within half of it of each atom's
    nearest periodic image."""
    signs = np.array([[1, 1, 1], [1, -1, 1], [-1, 1, 1], [-1, -1, 1]], dtype=float)
    return float(np.max(np.linalg.norm(signs @ lattice, axis=1)))


def periodic_images(
    lattice: np.ndarray, basis: np.ndarray, radius: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cartesian positions of all periodic images within about `radius` (Å) of the home cell.

    Returns
    -------
    positions : (N, 3) Å
    atom_index : (N,) index of the basis atom each image belongs to
    translation : (N, 3) integer cell translation of each image
    """
    ranges = _image_ranges(lattice, radius)
    grid = np.stack(np.meshgrid(*ranges, indexing="ij"), axis=-1).reshape(-1, 3)
    frac = (grid[:, None, :] + basis[None, :, :]).reshape(-1, 3)
    atom_index = np.tile(np.arange(len(basis)), len(grid))
    translation = np.repeat(grid, len(basis), axis=0)
    return frac @ lattice, atom_index, translation


def nearest_neighbour_distance(lattice: np.ndarray, basis: np.ndarray) -> float:
    """Shortest distance (Å) between two distinct atoms of the periodic structure."""
    # every atom has a neighbour within D/2 (D = longest diagonal), so images within D cover all candidates
    pos, idx, trans = periodic_images(lattice, basis, cell_diagonal(lattice))
    home = basis @ lattice
    best = math.inf
    for i, p in enumerate(home):
        d = np.linalg.norm(pos - p, axis=1)
        self_image = (idx == i) & np.all(trans == 0, axis=1)
        best = min(best, float(np.min(d[~self_image])))
    return best
