"""The partner candidates of a host: every other phase, the host's own second composition set, and the ordered
forms of the host's phase, each kept distinct from the host itself.

A compiled system knows phases by name. The solvus also needs the host's own phase as a partner (its second
composition set, labelled ``HOST#2``: NbC as ``FCC_A1#2`` in a Nb steel, the far side of a miscibility gap) and
the ordered phases whose disordered state is the host (B2 over BCC_A2, L12 over FCC_A1). Against the host's own
chemical potentials each of those has a zero driving force at the host's own constitution, which is the host,
never a partner of itself. `PartnerView` presents the system to the solvus engine with those entries added and
that state removed: a sample within `SCREEN_RADIUS` of the host (in mole fractions, and in ordering for an
ordered phase) is not screened, and an optimum that returns to the host (within `SAME_RADIUS`) is replaced by the
best distinct sample, a lower bound of the distinct optimum.

Labels: an ordered phase whose optimum is disordered is reported under its disordered phase's name (``HOST#2``
when that is the host's own phase).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np

from solubility.thermo.phases import DrivingForce, best_of_runs

__all__ = ["SAME_RADIUS", "SCREEN_RADIUS", "PartnerView", "partner_names", "relabel", "second_set"]

#: samples this close to the host (largest difference of mole fractions; of site fractions across ordering
#: sublattices for an ordered phase) are not screened as partners
SCREEN_RADIUS = 0.02
#: an optimum this close to the host is the host itself
SAME_RADIUS = 1e-3


def second_set(phase: str) -> str:
    """The label of a phase's second composition set."""
    return f"{phase}#2"


class PartnerView:
    """A compiled system seen as the candidates of one host (same interface as the system for the engine).

    Parameters
    ----------
    system
        The bound system (`solubility.thermo.system.BoundSystem`).
    host
        The host phase.
    family
        Ordered phases whose disordered state is the host's phase.
    ordering
        Phase -> indices of its ordering sublattices (ordered phases only).
    disordered
        Ordered phase -> its disordered phase.
    """

    def __init__(self, system, host: str, family: Sequence[str], ordering: Mapping[str, Sequence[int]],
                 disordered: Mapping[str, str]) -> None:
        self._args = (host, tuple(family), dict(ordering), dict(disordered))
        self.system = system
        self.elements = system.elements
        self.molar_masses = system.molar_masses
        self.pressure = system.pressure
        self.host = host
        self.twin = second_set(host)
        self._under = {name: name for name in system.phases}
        self._under[self.twin] = host
        self.phases = {label: system.phases[name] for label, name in self._under.items()}
        self.related = {self.twin, *family}
        self.disordered = dict(disordered)
        self._spread_idx = {p: _spread_index(system.phases[p], ordering[p]) for p in ordering if p in system.phases}
        self._ordering = {p: tuple(int(k) for k in ordering[p]) for p in ordering if p in system.phases}
        self._maps: dict[tuple[str, str], np.ndarray | None] = {}
        self.host_x: np.ndarray | None = None

    def rebound(self, system) -> PartnerView:
        """The same view over another binding of the same compiled system (new pressure or parameter values)."""
        return PartnerView(system, *self._args)

    # ---------------------------------------------------------------- delegation
    def underlying(self, label: str) -> str:
        return self._under[label]

    def chemical_potentials(self, phase: str, y: np.ndarray, T: float):
        return self.system.chemical_potentials(self._under[phase], y, T)

    def gibbs(self, phase: str, y: np.ndarray, T: float) -> float:
        return self.system.gibbs(self._under[phase], y, T)

    def set_host(self, y: np.ndarray) -> None:
        """Record the host's current constitution (its composition is what 'the host itself' means)."""
        n = self.system.phases[self.host].moles @ y
        self.host_x = n / n.sum()

    # ---------------------------------------------------------------- distinctness
    def spread(self, phase: str, y: np.ndarray) -> np.ndarray:
        """How far constitution(s) `y` of `phase` are from its disordered state (0 for a disordered phase)."""
        idx = self._spread_idx.get(self._under[phase])
        y2 = np.atleast_2d(y)
        if idx is None:
            return np.zeros(y2.shape[0])
        padded = np.concatenate((y2, np.zeros((y2.shape[0], 1))), axis=1)
        vals = padded[:, idx]  # (n, species, ordering sublattices)
        return (vals.max(axis=2) - vals.min(axis=2)).max(axis=1)

    def _is_host(self, phase: str, y: np.ndarray, x: np.ndarray, radius: float) -> np.ndarray:
        if phase not in self.related or self.host_x is None:
            return np.zeros(np.atleast_2d(y).shape[0], dtype=bool)
        near = np.max(np.abs(np.atleast_2d(x) - self.host_x), axis=1) < radius
        return near & (self.spread(phase, y) < radius)

    # ---------------------------------------------------------------- the engine's interface
    def screen(self, mu: np.ndarray, T: float,
               phases: Sequence[str]) -> dict[str, tuple[float, np.ndarray, np.ndarray]]:
        """Best sampled driving force (J per mole of atoms), its constitution and its mole fractions (read-only),
        each entry distinct from the host."""
        labels = tuple(phases)
        if not labels:
            return {}
        df, starts = self.system.sampled_driving_forces(mu, T, [self._under[p] for p in labels])
        df[~np.isfinite(df)] = -np.inf
        ends = np.append(starts[1:], df.size)
        for i, label in enumerate(labels):
            if label in self.related and self.host_x is not None:
                pf = self.phases[label]
                run = df[starts[i]:ends[i]]
                run[self._is_host(label, pf.samples, pf.sample_x, SCREEN_RADIUS)] = -np.inf
        values, best = best_of_runs(df, starts)
        return {label: (float(v), self.phases[label].samples[k].copy(), self.phases[label].sample_x[k])
                for label, v, k in zip(labels, values, best - starts, strict=True)}

    def driving_force(self, phase: str, mu: np.ndarray, T: float, y0: np.ndarray) -> DrivingForce:
        """Driving force of entry `phase` against `mu`, its constitution optimised from `y0`; an optimum that is
        the host itself is replaced by the best distinct sample."""
        res = self.system.driving_force(self._under[phase], mu, T, y0)
        if self._is_host(phase, res.y, res.x, SAME_RADIUS)[0]:
            value, y, x = self.screen(mu, T, [phase])[phase]
            return DrivingForce(phase, value, y, x, True)
        return DrivingForce(phase, res.value, res.y, res.x, res.converged)

    # ---------------------------------------------------------------- ordered phases in their disordered state
    def duplicates(self, phases: Sequence[str]) -> dict[str, str]:
        """Ordered entries among `phases` whose disordered phase is also among them (the host's own phase as its
        second set): ordered label -> the disordered entry's label."""
        out = {}
        for label in phases:
            dis = self.disordered.get(self._under[label])
            parent = self.twin if dis == self.host else dis
            if parent is not None and parent in phases and parent != label:
                out[label] = parent
        return out

    def as_disordered(self, phase: str, parent: DrivingForce, mu: np.ndarray, T: float, y_best: np.ndarray,
                      hint: np.ndarray | None) -> DrivingForce | None:
        """The optimum of ordered entry `phase` from its disordered phase's optimum `parent`, or None.

        Where the best sample of an ordered phase and its hint (if any) are both disordered, its optimisation
        starts in the disordered state and stays there: by the symmetry of the ordering sublattices the gradient
        in every ordering direction is zero in that state, so the optimum is the disordered phase's, taken at
        the same site fractions on every ordering sublattice. Returns None where that does not apply (the
        caller optimises the phase itself); the caller checks that the value equals the parent's.
        """
        if self.spread(phase, y_best)[0] > 1e-12 or (hint is not None and self.spread(phase, hint)[0] > 1e-12):
            return None
        y = self._from_disordered(phase, parent.phase, parent.y)
        if y is None:
            return None
        n = self.phases[phase].moles @ y
        atoms = float(n.sum())
        value = (float(mu @ n) - self.gibbs(phase, y, T)) / atoms
        return DrivingForce(phase, value, y, n / atoms, parent.converged and bool(np.isfinite(value)))

    def _from_disordered(self, phase: str, parent: str, y_dis: np.ndarray) -> np.ndarray | None:
        """Site fractions of ordered entry `phase` in the disordered state given by the disordered entry's `y_dis`
        (every ordering sublattice takes the disordered phase's first sublattice, the others its following ones
        in order), or None where the sublattices do not correspond."""
        key = (phase, parent)
        if key not in self._maps:
            self._maps[key] = _variable_map(self.phases[phase], self.phases[parent],
                                            self._ordering.get(self._under[phase], ()))
        idx = self._maps[key]
        if idx is None:
            return None
        return np.concatenate((y_dis, [0.0]))[idx]

    def label(self, phase: str, y: np.ndarray | None) -> str:
        """The name a partner is reported under (an ordered phase in its disordered state by its disordered
        phase's name)."""
        name = self._under[phase]
        dis = self.disordered.get(name)
        if dis is None or y is None or self.spread(phase, y)[0] >= SAME_RADIUS:
            return phase
        return self.twin if dis == self.host else dis


def _spread_index(pf, ordering: Sequence[int]) -> np.ndarray:
    """(species, ordering sublattices) indices of site-fraction variables (ny: a padded zero where a species is
    absent from a sublattice)."""
    subs = [int(k) for k in ordering]
    names = sorted({pf.species[j] for j in range(pf.ny) if int(pf.sublattice_of[j]) in subs})
    idx = np.full((len(names), len(subs)), pf.ny, dtype=int)
    for j in range(pf.ny):
        k = int(pf.sublattice_of[j])
        if k in subs:
            idx[names.index(pf.species[j]), subs.index(k)] = j
    return idx


def _variable_map(ordered, disordered, ordering: Sequence[int]) -> np.ndarray | None:
    """For each site-fraction variable of `ordered`, the index of the disordered phase's variable that gives its
    value in the disordered state (``disordered.ny`` for a constituent the disordered phase lacks: zero), or None
    where the sublattices do not correspond."""
    subs = [int(k) for k in ordering]
    rest = [k for k in range(ordered.n_sublattices) if k not in subs]
    if not subs or disordered.n_sublattices != 1 + len(rest):
        return None
    where = {(int(disordered.sublattice_of[j]), disordered.species[j]): j for j in range(disordered.ny)}
    idx = np.full(ordered.ny, disordered.ny, dtype=int)
    for j in range(ordered.ny):
        k = int(ordered.sublattice_of[j])
        idx[j] = where.get((0 if k in subs else 1 + rest.index(k), ordered.species[j]), disordered.ny)
    return idx


def partner_names(view, partners: Sequence[str], phase_y: Mapping[str, np.ndarray] | None) -> tuple[str, ...]:
    """Partners under the names they are reported by (`PartnerView.label`), each once."""
    out: list[str] = []
    for p in partners:
        name = view.label(p, None if phase_y is None else phase_y.get(p))
        if name not in out:
            out.append(name)
    return tuple(out)


def relabel(view, point):
    """A boundary point with its partners under the names they are reported by, and the first partner's
    composition (``partner_x``)."""
    if not point.partners:
        return point
    first = point.partners[0]
    x = None
    if first in point.phase_y:
        n = view.phases[first].moles @ point.phase_y[first]
        x = n / n.sum()
    return replace(point, partners=partner_names(view, point.partners, point.phase_y), partner_x=x)
