"""Pure-numpy numerics of the thermo layer: constitution sampling and the driving-force maximisation.

Nothing here knows about pycalphad: a phase is described by the sublattice index of each site-fraction variable,
and its Gibbs energy by plain callables, so every function can be tested on closed-form energies.

Conventions: site fractions ``y`` are grouped by sublattice (``sublattice_of[j]`` is the sublattice of variable
``j``) and sum to 1 on each sublattice. Energies in J/mol. The driving force of a phase against chemical
potentials mu, per mole of atoms, is ``phi(y) = (mu . N(y) - G(y)) / n(y)`` with ``N(y) = moles @ y`` the moles of
each element per formula unit and ``n(y) = atoms @ y`` the atoms per formula unit (both linear in y).
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Sequence

import numpy as np

__all__ = [
    "Y_FLOOR",
    "ascent_step",
    "fraction_to_boundary",
    "maximise_phi",
    "normalise",
    "reduced_basis",
    "sample_constitutions",
    "simplex_points",
]

#: smallest site fraction used anywhere (pycalphad's own floor is 1e-14; we go below it on purpose)
Y_FLOOR = 1e-300
#: iterations of the Newton ascent before it gives up (a Newton run converges in well under 50)
MAX_ITER = 200


def normalise(y: np.ndarray, sublattice_of: np.ndarray, ns: int) -> np.ndarray:
    """`y` scaled so that the fractions of each of the `ns` sublattices sum to 1."""
    sums = np.bincount(sublattice_of, weights=y, minlength=ns)
    return y / sums[sublattice_of]


def reduced_basis(groups: Sequence[np.ndarray], y: np.ndarray, ny: int) -> np.ndarray:
    """(ny, k) basis of the directions that keep every sublattice sum fixed.

    Columns ``e_j - e_pivot`` for each non-pivot variable j of each sublattice with more than one variable; the
    pivot of a sublattice is its largest fraction at `y`, so a step along a column is well scaled.
    """
    cols = []
    for idx in groups:
        if idx.size < 2:
            continue
        pivot = int(idx[np.argmax(y[idx])])
        for j in idx:
            if j != pivot:
                col = np.zeros(ny)
                col[j], col[pivot] = 1.0, -1.0
                cols.append(col)
    return np.array(cols).T if cols else np.zeros((ny, 0))


def ascent_step(rg: np.ndarray, rh: np.ndarray) -> tuple[np.ndarray, float]:
    """Newton ascent step d solving rh d = -rg; where rh is not negative definite its spectrum is shifted.

    Returns the step and the shift applied (0 for a plain Newton step).
    """
    if rg.size == 1:
        h = float(rh[0, 0])
        if h < 0:
            return np.array([-rg[0] / h]), 0.0
        shift = h + 1e-8 * max(1.0, abs(h))
        return np.array([-rg[0] / (h - shift)]), shift
    try:
        L = np.linalg.cholesky(-rh)
        return np.linalg.solve(L.T, np.linalg.solve(L, rg)), 0.0
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(rh)
        shift = float(w.max()) + 1e-8 * max(1.0, float(np.abs(w).max()))
        return -V @ ((V.T @ rg) / (w - shift)), shift


def fraction_to_boundary(y: np.ndarray, step: np.ndarray, keep: float = 1e-3) -> float:
    """Largest alpha <= 1 such that every fraction of ``y + alpha * step`` keeps at least `keep` of its value."""
    neg = step < 0
    if not np.any(neg):
        return 1.0
    limits = (1.0 - keep) * y[neg] / (-step[neg])
    return float(min(1.0, limits.min()))


def simplex_points(k: int) -> np.ndarray:
    """Sample points on the (k-1)-simplex: vertices, log-spaced dilute edges and an interior lattice.

    Every edge carries 1e-12 ... 1e-1 log-spaced and a linear run of 39 interior points from both ends; for
    k >= 3 a seeded Dirichlet sample of 60 k interior points is added. Fractions are clipped to >= 1e-14.
    """
    if k == 1:
        return np.ones((1, 1))
    dilute = np.logspace(-12, -1, 23)
    t = np.unique(np.concatenate((dilute, np.linspace(0.0, 1.0, 41)[1:-1], 1.0 - dilute)))
    pts = []
    for i, j in itertools.combinations(range(k), 2):
        edge = np.zeros((t.size, k))
        edge[:, i] = t
        edge[:, j] = 1.0 - t
        pts.append(edge)
    if k >= 3:
        rng = np.random.default_rng(20261201)
        pts.append(rng.dirichlet(np.full(k, 0.7), size=60 * k))
    out = np.concatenate(pts)
    return np.clip(out, 1e-14, 1.0)


def sample_constitutions(sublattice_of: np.ndarray, ny: int, cap: int = 4000) -> np.ndarray:
    """A fixed (seeded) sample of constitutions: the product of per-sublattice simplex samples, capped.

    Returns an (n, ny) array whose rows sum to 1 on each sublattice; n <= `cap` (a seeded random subset of the
    product where the full product is larger).
    """
    ns = int(sublattice_of.max()) + 1 if ny else 0
    per_sub = [simplex_points(int(np.sum(sublattice_of == s))) for s in range(ns)]
    sizes = [p.shape[0] for p in per_sub]
    total = int(np.prod(sizes))
    if total <= cap:
        combos = np.array(list(itertools.product(*[range(n) for n in sizes])))
    else:
        rng = np.random.default_rng(12345)
        combos = np.column_stack([rng.integers(0, n, size=cap) for n in sizes])
    y = np.zeros((combos.shape[0], ny))
    for s, pts in enumerate(per_sub):
        idx = np.flatnonzero(sublattice_of == s)
        y[:, idx] = pts[combos[:, s]]
    return y


def maximise_phi(
    gibbs: Callable[[np.ndarray], float],
    derivatives: Callable[[np.ndarray], tuple[float, np.ndarray, np.ndarray]],
    mu_n: np.ndarray,
    atoms: np.ndarray,
    y0: np.ndarray,
    sublattice_of: np.ndarray,
    *,
    basis: Callable[[np.ndarray], np.ndarray] | None = None,
) -> tuple[np.ndarray, bool]:
    """Maximise ``phi(y) = (mu_n . y - G(y)) / (atoms . y)`` over the product of simplices.

    A reduced Newton method (shifted where the reduced Hessian is not negative definite) with a fraction-to-
    boundary rule and a backtracking line search.

    Parameters
    ----------
    gibbs
        G(y), J per mole of formula units.
    derivatives
        y -> (G, dG/dy, d2G/dy2).
    mu_n
        (ny,) ``moles.T @ mu``: the value of the potentials carried by each site-fraction variable, J/mol.
    atoms
        (ny,) atoms per formula unit carried by each variable (``n(y) = atoms @ y``).
    y0
        Start, normalised on each sublattice.
    sublattice_of
        (ny,) sublattice index of each variable.
    basis
        y -> reduced basis (`reduced_basis` by default); a caller may cache it by pivot choice.

    Returns
    -------
    y, converged
        The optimum, and whether it is one: converged means a full Newton step with a Newton decrement below
        1e-10 J/mol in the quadratic regime, or a step that no longer moves y (or no ascent at all) at a reduced
        gradient below 1e-6 max(1, |phi|) J/mol per unit fraction: a step that stalls away from a stationary
        point (shortened by the line search, or tiny because the curvature is wrong) is not convergence.
    """
    ns = int(sublattice_of.max()) + 1
    ny = y0.size
    if basis is None:
        groups = tuple(np.flatnonzero(sublattice_of == k) for k in range(ns))

        def basis(y: np.ndarray) -> np.ndarray:
            return reduced_basis(groups, y, ny)

    def phi_of(y: np.ndarray) -> float:
        return (float(mu_n @ y) - gibbs(y)) / float(atoms @ y)

    y = y0
    phi = phi_of(y)
    for _ in range(MAX_ITER):
        g, grad, hess = derivatives(y)
        n = float(atoms @ y)
        phi = (float(mu_n @ y) - g) / n
        gphi = (mu_n - grad - phi * atoms) / n
        hphi = (-hess - np.outer(gphi, atoms) - np.outer(atoms, gphi)) / n
        Z = basis(y)
        rg = Z.T @ gphi
        rh = Z.T @ hphi @ Z
        if not (np.all(np.isfinite(rg)) and np.all(np.isfinite(rh))):
            return y, False
        d, shift = ascent_step(rg, rh)
        step = Z @ d
        alpha = fraction_to_boundary(y, step)
        small_gradient = bool(np.max(np.abs(rg), initial=0.0) < 1e-6 * max(1.0, abs(phi)))
        if (
            shift == 0.0
            and alpha == 1.0
            and float(-rg @ d) < 1e-10  # Newton decrement: phi within 1e-10 J/mol of its maximum
            and float(np.max(np.abs(step) / np.maximum(y, Y_FLOOR))) < 1e-6  # in the quadratic regime
        ):
            return normalise(np.maximum(y + step, Y_FLOOR), sublattice_of, ns), True
        # phi is a small difference of large terms (mu . N and G, each of order 1e5 J/mol): its rounding error is
        # about 1e-16 of those, not of phi, and a line search that asks more backtracks on noise
        noise = 1e-13 * max(1.0, abs(phi), abs(g) / n)
        for _ls in range(40):
            y_new = normalise(np.maximum(y + alpha * step, Y_FLOOR), sublattice_of, ns)
            phi_new = phi_of(y_new)
            if phi_new >= phi - noise:
                break
            alpha *= 0.5
        else:  # no ascent possible at double precision: converged only if the gradient is tiny
            return y, small_gradient
        rel = float(np.max(np.abs(y_new - y) / np.maximum(y, Y_FLOOR)))
        y = y_new
        if rel < 1e-12:  # y no longer moves: an optimum only where the reduced gradient is small
            return y, small_gradient
    return y, False
