"""The pure-numpy optimiser and sampling of the thermo layer, on closed-form Gibbs energies (no pycalphad).

References are outside the optimiser: the log-sum-exp closed form of an ideal reciprocal solution's driving
force (a textbook result of the ideal solution model: maximising sum_i y_i g_i - RT sum_i y_i ln y_i over a
simplex gives y_i proportional to exp(g_i / RT) and the value RT ln sum_i exp(g_i / RT); common practice, no
source needed), and scipy's bounded scalar minimiser for a phase whose atoms per formula unit vary with y.
The energies are invented (labelled), chosen only to put the optimum at a known place.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from solubility.constants import R
from solubility.thermo.optimise import (
    Y_FLOOR,
    ascent_step,
    fraction_to_boundary,
    maximise_phi,
    normalise,
    reduced_basis,
    sample_constitutions,
    simplex_points,
)

T = 800.0  # K


def _ideal_reciprocal(g0: np.ndarray, g1: np.ndarray):
    """(A,B,C)1(D,E)1, G(y) = sum g0_i y_i + sum g1_j y'_j + RT (sum y ln y + sum y' ln y'); 2 atoms always.

    Invented energies (J/mol). With mu = 0 the driving force per atom is phi = -G / 2.
    """
    sub = np.array([0, 0, 0, 1, 1])
    g = np.concatenate((g0, g1))

    def gibbs(y):
        return float(g @ y + R * T * np.sum(y * np.log(y)))

    def derivatives(y):
        return gibbs(y), g + R * T * (np.log(y) + 1.0), np.diag(R * T / y)

    return sub, gibbs, derivatives


@pytest.mark.parametrize("start", ["uniform", "dilute corner"])
def test_ideal_reciprocal_optimum_is_the_log_sum_exp_closed_form(start):
    g0 = np.array([0.0, -3000.0, 5000.0])  # invented, J/mol
    g1 = np.array([-1000.0, 2500.0])
    sub, gibbs, derivatives = _ideal_reciprocal(g0, g1)
    y0 = np.full(5, 0.5) if start == "uniform" else np.array([1 - 2e-9, 1e-9, 1e-9, 1e-9, 1 - 1e-9])
    y0 = normalise(y0, sub, 2)
    y, converged = maximise_phi(gibbs, derivatives, np.zeros(5), np.full(5, 1.0), y0, sub)
    assert converged
    expected = []
    for g in (g0, g1):
        w = np.exp(-g / (R * T))
        expected.append(w / w.sum())
    # Newton converges quadratically; it stops with phi within 1e-10 J/mol of its maximum, which puts y within
    # about 1e-8 relative of the optimum (phi is quadratic in dy with curvature ~RT/y)
    np.testing.assert_allclose(y, np.concatenate(expected), rtol=1e-8)
    value = -gibbs(y) / 2.0
    closed = sum(R * T * math.log(np.sum(np.exp(-g / (R * T)))) for g in (g0, g1)) / 2.0
    assert value == pytest.approx(closed, abs=1e-9)


def test_vacancy_sublattice_optimum_matches_scipy():
    """(M)1(X,VA)3: atoms per formula unit 1 + 3 y_X vary with y, so phi is a ratio; scipy finds its maximum."""
    g_mx3 = 20000.0  # invented G(M:X) - G(M:VA), J/mol
    mu = np.array([-30000.0, -5000.0])  # invented potentials of M and X, J/mol
    sub = np.array([0, 1, 1])  # variables: M, X, VA
    moles = np.array([[1.0, 0.0, 0.0], [0.0, 3.0, 0.0]])

    def gibbs(y):
        return float(g_mx3 * y[1] + 3 * R * T * (y[1] * math.log(y[1]) + y[2] * math.log(y[2])))

    def derivatives(y):
        grad = np.array([0.0, g_mx3 + 3 * R * T * (math.log(y[1]) + 1), 3 * R * T * (math.log(y[2]) + 1)])
        return gibbs(y), grad, np.diag([0.0, 3 * R * T / y[1], 3 * R * T / y[2]])

    mu_n, atoms = moles.T @ mu, moles.sum(axis=0)
    y, converged = maximise_phi(gibbs, derivatives, mu_n, atoms, np.array([1.0, 0.5, 0.5]), sub)
    assert converged

    def minus_phi(t):
        yy = np.array([1.0, math.exp(t), -math.expm1(t)])
        return -(mu_n @ yy - gibbs(yy)) / (atoms @ yy)

    ref = minimize_scalar(minus_phi, bounds=(-40.0, -1e-9), method="bounded", options={"xatol": 1e-12})
    # scipy's bounded Brent search stops at xatol 1e-12 in ln y; the two optima agree far inside 1e-7 relative
    assert y[1] == pytest.approx(math.exp(ref.x), rel=1e-7)


def test_stalled_step_away_from_the_optimum_is_not_converged():
    """A Hessian of the wrong sign and absurd size (-1e26, invented) makes every ascent step about 1e-18 of the
    gradient: y stops moving long before the optimum. The optimiser must not report that as convergence (the
    reduced gradient there is hundreds of J/mol, not small)."""
    sub = np.array([0, 0])
    g = np.array([0.0, -3000.0])  # invented, J/mol

    def gibbs(y):
        return float(g @ y + R * T * np.sum(y * np.log(y)))

    def wrong_curvature(y):
        return gibbs(y), g + R * T * (np.log(y) + 1.0), -1e26 * np.eye(2)

    y, converged = maximise_phi(gibbs, wrong_curvature, np.zeros(2), np.ones(2), np.array([0.9, 0.1]), sub)
    assert not converged
    assert y[1] == pytest.approx(0.1, rel=1e-6)  # it really stalled (the optimum is y[1] = 0.61)
    _, ok = maximise_phi(gibbs, lambda y: (gibbs(y), g + R * T * (np.log(y) + 1.0), np.diag(R * T / y)),
                         np.zeros(2), np.ones(2), np.array([0.9, 0.1]), sub)
    assert ok  # the same problem with its true Hessian converges


def test_nan_energy_is_not_converged():
    sub = np.array([0, 0])

    def gibbs(y):
        return float("nan")

    def derivatives(y):
        return float("nan"), np.full(2, np.nan), np.full((2, 2), np.nan)

    _, converged = maximise_phi(gibbs, derivatives, np.zeros(2), np.ones(2), np.array([0.5, 0.5]), sub)
    assert not converged


def test_fraction_to_boundary_keeps_a_share_of_every_fraction():
    y = np.array([0.5, 1e-20, 0.5])
    step = np.array([0.1, -1.0, -0.1])
    alpha = fraction_to_boundary(y, step, keep=1e-3)
    assert np.all(y + alpha * step >= 1e-3 * y * (1 - 1e-12))
    assert alpha == pytest.approx(0.999e-20)
    assert fraction_to_boundary(y, np.array([0.1, 0.2, 0.3])) == 1.0


def test_ascent_step_ascends_even_where_the_hessian_is_indefinite():
    rng = np.random.default_rng(7)
    for _ in range(20):
        a = rng.normal(size=(3, 3))
        rh = a + a.T  # indefinite in general
        rg = rng.normal(size=3)
        d, shift = ascent_step(rg, rh)
        assert float(rg @ d) > 0  # first-order increase of phi along d
    d, shift = ascent_step(np.array([1.0]), -np.eye(1) * 2.0)
    assert shift == 0.0 and d[0] == pytest.approx(0.5)


def test_reduced_basis_keeps_sublattice_sums_and_pivots_on_the_largest():
    groups = (np.array([0, 1, 2]), np.array([3]), np.array([4, 5]))
    y = np.array([0.2, 0.7, 0.1, 1.0, 0.3, 0.7])
    Z = reduced_basis(groups, y, 6)
    assert Z.shape == (6, 3)
    for idx in groups:
        np.testing.assert_array_equal(Z[idx].sum(axis=0), 0.0)
    assert np.all(Z[1] == -1 * (Z[[0, 2]].sum(axis=0) != 0))  # y[1] is the pivot of the first sublattice


def test_normalise_and_samples_sum_to_one_on_each_sublattice():
    sub = np.array([0, 0, 1, 1, 1, 2])
    y = normalise(np.array([1.0, 3.0, 1.0, 1.0, 2.0, 5.0]), sub, 3)
    np.testing.assert_allclose(np.bincount(sub, weights=y), 1.0)
    samples = sample_constitutions(sub, 6)
    sums = np.stack([samples[:, sub == k].sum(axis=1) for k in range(3)], axis=1)
    np.testing.assert_allclose(sums, 1.0, rtol=1e-12)
    assert samples.min() >= 1e-14 > Y_FLOOR
    np.testing.assert_array_equal(samples, sample_constitutions(sub, 6))  # seeded: the same every time
    big = sample_constitutions(np.repeat(np.arange(4), 3), 12, cap=500)
    assert big.shape == (500, 12)


def test_simplex_points_reach_the_dilute_corners():
    pts = simplex_points(3)
    np.testing.assert_allclose(pts.sum(axis=1), 1.0, rtol=1e-12)
    for k in range(3):  # each constituent is sampled from 1e-12 up to practically 1
        assert pts[:, k].min() <= 1e-12 and pts[:, k].max() > 1 - 1e-11
    np.testing.assert_array_equal(simplex_points(1), np.ones((1, 1)))

