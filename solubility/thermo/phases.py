"""Bookkeeping of one compiled phase and the driving-force result type (numpy only; no pycalphad import).

`PhaseFunctions` holds a phase's compiled record with what the solver needs beside it: the constituent of each
site-fraction variable, its sublattice, the moles of each element it carries (``N(y) = moles @ y``, linear in y),
the constant part of the tangent-plane system and a fixed sample of constitutions for screening.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from solubility.errors import DatabaseError
from solubility.thermo.optimise import reduced_basis, sample_constitutions

__all__ = ["DrivingForce", "PhaseFunctions", "best_of_runs", "phase_functions", "stack_samples"]


@dataclass(frozen=True)
class DrivingForce:
    """Driving force of one phase against given chemical potentials.

    Attributes
    ----------
    phase
        Phase name.
    value
        ``max_y (mu . x(y) - G_m(y))``, J per mole of atoms; > 0 means the phase is more stable.
    y
        Site fractions at the optimum, in the phase's variable order.
    x
        Mole fractions of the elements at the optimum (system elements order).
    converged
        False if the constitution optimisation did not converge or the energy is not a finite number.
    """

    phase: str
    value: float
    y: np.ndarray
    x: np.ndarray
    converged: bool


@dataclass
class PhaseFunctions:
    """Compiled functions and sublattice bookkeeping for one phase."""

    name: str
    record: object  # pycalphad PhaseRecord (the compiled system's; a bound system may hold its own copy)
    species: tuple[str, ...]  # constituent name of each site-fraction variable
    sublattice_of: np.ndarray  # (ny,) sublattice index of each variable
    site_ratios: tuple[float, ...]
    moles: np.ndarray  # (n_el, ny): moles of each element per formula unit = moles @ y (linear in y)
    samples: np.ndarray = field(repr=False)  # (n_pts, ny) sample constitutions for screening
    sample_x: np.ndarray = field(repr=False)  # (n_pts, n_el) mole fractions of the samples
    groups: tuple[np.ndarray, ...] = field(default=(), repr=False)  # variable indices of each sublattice
    tangent: np.ndarray | None = field(default=None, repr=False)  # constant part of the tangent-plane matrix
    _bases: dict = field(default_factory=dict, repr=False)  # pivot choice -> reduced basis
    charge: np.ndarray | None = field(default=None, repr=False)  # (ny,) charge per formula unit of each variable

    def reduced_basis(self, y: np.ndarray) -> np.ndarray:
        """`solubility.thermo.optimise.reduced_basis` at `y`, cached by the choice of pivots."""
        pivots = tuple(int(idx[np.argmax(y[idx])]) for idx in self.groups if idx.size > 1)
        Z = self._bases.get(pivots)
        if Z is None:
            Z = reduced_basis(self.groups, y, self.ny)
            if self.charge is not None:  # keep electroneutrality: directions in the null space of q . dy = 0
                c = self.charge @ Z
                if np.any(c != 0):
                    vt = np.linalg.svd(c[None, :])[2]
                    Z = Z @ vt[1:].T
            self._bases[pivots] = Z
        return Z

    @property
    def atoms(self) -> np.ndarray:
        """(ny,) atoms per formula unit contributed by each site fraction (n(y) = atoms @ y)."""
        return self.moles.sum(axis=0)

    @property
    def ny(self) -> int:
        return len(self.species)

    @property
    def n_sublattices(self) -> int:
        return len(self.site_ratios)

    @property
    def stoichiometric(self) -> bool:
        return self.ny == self.n_sublattices



def phase_functions(record, model, elements: Sequence[str]) -> PhaseFunctions:
    """The bookkeeping of one compiled phase: its variables, sublattices, element balance and samples.

    Parameters
    ----------
    record
        The phase's compiled pycalphad PhaseRecord (only its ``variables`` and ``state_variables`` are read).
    model
        The phase's pycalphad Model (only its ``site_ratios`` are read).
    elements
        The system's elements, in its order (VA excluded).
    """
    name = str(record.phase_name)
    state = [str(s) for s in record.state_variables]
    if state != ["N", "P", "T"]:  # pragma: no cover - guards against an API change in pycalphad
        raise DatabaseError(f"unexpected state variables {state} for phase {name}")
    variables = list(record.variables)
    species = tuple(str(var.species.name) for var in variables)
    sublattice_of = np.array([int(var.sublattice_index) for var in variables], dtype=int)
    ny = len(variables)
    elements = list(elements)
    moles = np.zeros((len(elements), ny))
    for j, var in enumerate(variables):  # site ratio times the species' stoichiometry
        ratio = float(model.site_ratios[int(var.sublattice_index)])
        for el, count in var.species.constituents.items():
            if el in elements:
                moles[elements.index(el), j] += ratio * float(count)
    charge = np.array([float(model.site_ratios[int(var.sublattice_index)]) * float(var.species.charge)
                       for var in variables])
    samples = sample_constitutions(sublattice_of, ny)
    if np.any(charge != 0):
        samples = neutral_samples(samples, charge)
    sx = samples @ moles.T
    with np.errstate(invalid="ignore", divide="ignore"):
        sx = sx / sx.sum(axis=1, keepdims=True)
    keep = np.all(np.isfinite(sx), axis=1)
    n_el, ns = moles.shape[0], int(sublattice_of.max()) + 1
    tangent = np.zeros((ny + 1, n_el + ns))
    tangent[:ny, :n_el] = moles.T
    tangent[np.arange(ny), n_el + sublattice_of] = 1.0
    return PhaseFunctions(
        name=name,
        record=record,
        species=species,
        sublattice_of=sublattice_of,
        site_ratios=tuple(float(r) for r in model.site_ratios),
        moles=moles,
        samples=samples[keep],
        sample_x=sx[keep],
        groups=tuple(np.flatnonzero(sublattice_of == k) for k in range(ns)),
        tangent=tangent,
        charge=charge if np.any(charge != 0) else None,
    )


def neutral_samples(samples: np.ndarray, charge: np.ndarray, cap: int = 4000) -> np.ndarray:
    """Electrically neutral constitutions from a sample: the neutral ones, and for pairs of a positively and a
    negatively charged sample the convex combination with zero charge (charge is linear in y, and a convex
    combination keeps every sublattice's sum at 1). Seeded, so the same phase always gets the same sample."""
    q = samples @ charge
    tol = 1e-12 * max(1.0, float(np.abs(charge).max()))
    zero, pos, neg = samples[np.abs(q) <= tol], np.flatnonzero(q > tol), np.flatnonzero(q < -tol)
    if pos.size == 0 or neg.size == 0:
        return zero
    rng = np.random.default_rng(20261201)
    n = min(cap, pos.size * neg.size)
    i, j = rng.choice(pos, n), rng.choice(neg, n)
    w = (-q[j] / (q[i] - q[j]))[:, None]
    mixed = w * samples[i] + (1.0 - w) * samples[j]
    return np.concatenate((zero, mixed))


def best_of_runs(values: np.ndarray, starts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Largest value of each run of `values` (runs begin at `starts`) and its index (the first one); a run holding
    a NaN gives NaN and the index of its first element."""
    top = np.maximum.reduceat(values, starts)
    hit = np.flatnonzero(values == np.repeat(top, np.diff(np.append(starts, values.size))))
    first = hit[np.minimum(np.searchsorted(hit, starts), hit.size - 1)] if hit.size else starts
    ends = np.append(starts[1:], values.size)
    best = np.where((first >= starts) & (first < ends), first, starts)  # NaN runs have no hit
    return top, best


def stack_samples(phases: Sequence[PhaseFunctions]) -> tuple[np.ndarray, np.ndarray]:
    """(mole fractions of every sample of `phases`, stacked phase after phase; where each phase's run begins)."""
    sizes = [pf.sample_x.shape[0] for pf in phases]
    return (np.concatenate([pf.sample_x for pf in phases]),
            np.concatenate(([0], np.cumsum(sizes)[:-1])).astype(int))
