"""Documented limits on structures, so that every accepted input is answered in about a second.

The site finder triangulates a periodic block of atoms reaching half the longest cell diagonal beyond the cell;
its size grows with the cell's aspect ratio and its number of atoms (measured on a shared 2-core machine: hcp
with c/a = 8 takes 1.6 s, c/a = 20 takes 9 s, c/a = 1000 would need gigabytes; an fcc supercell of 32 atoms
2.6 s, of 108 atoms 12 s). So a cell is refused, with one line naming the value and the accepted range,
when

* a length (lattice vector, lattice parameter, host or solute radius) lies outside [`MIN_LENGTH`, `MAX_LENGTH`]
  Å (|log10(length / Å)| <= 3; real cells are 2 to 30 Å, and 1e308 would overflow the geometry);
* an angle between two lattice vectors lies outside [`MIN_ANGLE`, `MAX_ANGLE`] degrees;
* its aspect ratio, the longest lattice vector over the smallest distance between opposite cell faces, is above
  `MAX_ASPECT` (needle, flat and nearly singular cells);
* it has more than `MAX_ATOMS` atoms;
* (hcp) c/a lies outside `C_OVER_A_RANGE` (real hcp metals: 1.57 to 1.89).

This module imports numpy only.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from solubility.errors import InputError, StructureError

__all__ = [
    "C_OVER_A_RANGE",
    "MAX_ANGLE",
    "MAX_ASPECT",
    "MAX_ATOMS",
    "MAX_LENGTH",
    "MIN_ANGLE",
    "MIN_LENGTH",
    "check_atom_count",
    "check_c_over_a",
    "check_lattice",
    "check_length",
]

#: accepted lengths, Å
MIN_LENGTH = 1e-3
MAX_LENGTH = 1e3
#: accepted angles between lattice vectors, degrees
MIN_ANGLE = 10.0
MAX_ANGLE = 170.0
#: largest aspect ratio: longest lattice vector / smallest distance between opposite faces of the cell
MAX_ASPECT = 10.0
#: most host atoms in a cell
MAX_ATOMS = 128
#: accepted hcp axial ratio c/a (keeps the hcp cell's aspect ratio within MAX_ASPECT)
C_OVER_A_RANGE = (0.1, 8.0)


def _number(value: Any) -> bool:
    return not isinstance(value, bool) and isinstance(value, int | float | np.integer | np.floating)


def check_length(value: Any, what: str, *, error: type[InputError] = StructureError) -> float:
    """`value` as a float if it is a finite length within [MIN_LENGTH, MAX_LENGTH] Å; else `error`, one line."""
    if not _number(value) or not math.isfinite(value) or value <= 0:
        raise error(f"{what} {value!r} is not accepted; expected a finite number of Å > 0")
    if not MIN_LENGTH <= value <= MAX_LENGTH:
        raise error(
            f"{what} {value!r} Å is outside the accepted range {MIN_LENGTH:g} to {MAX_LENGTH:g} Å"
        )
    return float(value)


def check_c_over_a(value: Any) -> float:
    """hcp axial ratio c/a within `C_OVER_A_RANGE` (StructureError otherwise)."""
    lo, hi = C_OVER_A_RANGE
    if not _number(value) or not math.isfinite(value) or value <= 0:
        raise StructureError(f"c/a {value!r} is not accepted; expected a finite number > 0")
    if not lo <= value <= hi:
        raise StructureError(f"c/a {value!r} is outside the accepted range {lo:g} to {hi:g}")
    return float(value)


def check_atom_count(n: int) -> None:
    """At most `MAX_ATOMS` atoms per cell (StructureError otherwise)."""
    if n > MAX_ATOMS:
        raise StructureError(f"the cell has {n} atoms; at most {MAX_ATOMS} are accepted")


def check_lattice(lattice: np.ndarray) -> None:
    """Lengths, angles and aspect ratio of a (3, 3) lattice (rows are vectors, Å) within the limits.

    An exactly singular lattice is left to the caller's own check (it has its own message).

    Raises
    ------
    StructureError
        One line naming the value and the accepted range.
    """
    biggest = float(np.max(np.abs(lattice)))
    if biggest > MAX_LENGTH:  # before any product: 1e308 would overflow
        raise StructureError(
            f"lattice component {biggest:g} Å is outside the accepted range of lengths, at most {MAX_LENGTH:g} Å"
        )
    lengths = np.linalg.norm(lattice, axis=1)
    for name, length in zip("abc", lengths, strict=True):
        if 0 < length < MIN_LENGTH:
            raise StructureError(
                f"lattice vector {name} of length {length:g} Å is outside the accepted range "
                f"{MIN_LENGTH:g} to {MAX_LENGTH:g} Å"
            )
    volume = abs(float(np.linalg.det(lattice)))
    if np.any(lengths == 0) or volume < 1e-6 * float(np.prod(lengths)):
        return  # singular: the caller says so in its own words
    unit = lattice / lengths[:, None]
    for (i, j), name in zip(((1, 2), (0, 2), (0, 1)), ("alpha", "beta", "gamma"), strict=True):
        angle = math.degrees(math.acos(float(np.clip(unit[i] @ unit[j], -1.0, 1.0))))
        if not MIN_ANGLE <= angle <= MAX_ANGLE:
            raise StructureError(
                f"cell angle {name} = {angle:.4g} degrees is outside the accepted range {MIN_ANGLE:g} to "
                f"{MAX_ANGLE:g} degrees"
            )
    faces = [np.linalg.norm(np.cross(lattice[j], lattice[k])) for j, k in ((1, 2), (0, 2), (0, 1))]
    heights = [volume / f for f in faces]
    if min(heights) == 0:
        return
    aspect = float(np.max(lengths)) / min(heights)
    if aspect > MAX_ASPECT:
        raise StructureError(
            f"cell aspect ratio {aspect:.4g} (longest vector {float(np.max(lengths)):.4g} Å over the smallest "
            f"distance between opposite faces {min(heights):.4g} Å) is above the accepted {MAX_ASPECT:g}; "
            "give a less elongated, flat or skewed cell"
        )
