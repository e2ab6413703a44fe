"""Numerical guarantees of the solvus engine, each checked by an independent route.

- Down to x = 1e-12 the boundary is checked with pycalphad's public `calculate` (its own Model, its own
  compiled code): the host's chemical potentials are taken from finite differences of its Gibbs energy at the
  returned composition, and the partner's driving force must vanish there. pycalphad's ideal-mixing term is
  exact above site fractions of 1e-15, which covers every point used here.
- Results do not depend on the temperature step: a coarse line and a fine line agree where they share
  temperatures, and the partners agree.
- The located partner change is bracketed by points with the partners on each side.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from pycalphad import calculate

import solubility
from solubility.databases.reader import load_database

R = 8.3145  # pycalphad's gas constant (pycalphad.variables.R), which its ideal-mixing term uses
METASTABLE = ["GRAPHITE", "DIAMOND_A4"]


def _gm(db, phase, y, T):
    res = calculate(db, ["C", "FE", "VA"], [phase], T=T, P=101325, N=1, points=np.atleast_2d(y), to_xarray=False)
    return float(np.squeeze(res.GM))


def _independent_dilute_root(db, T, y0):
    """ln y of C in BCC_A2 where cementite's driving force vanishes, from pycalphad's calculate only.

    BCC_A2 is (FE)1(C,VA)3 with G_f = GM (1 + 3 y) per formula unit. Its ideal part 3RT(y ln y + (1-y) ln(1-y))
    is differentiated analytically and the smooth rest by a forward three-point difference with h = 1e-4, which
    avoids the cancellation a difference at h ~ y would suffer. mu_C = (dG_f/dy) / 3 along y_C + y_VA = 1 and
    mu_FE = G_f - 3 y mu_C. Cementite (FE)3(C)1 appears where 3 mu_FE + mu_C = 4 GM(Fe3C).
    """
    g_cem = 4.0 * _gm(db, "CEMENTITE_D011", [1.0, 1.0], T)

    def ideal(yy):
        return 3.0 * R * T * (yy * math.log(yy) + (1.0 - yy) * math.log1p(-yy)) if yy > 0 else 0.0

    def rest(yy):
        return _gm(db, "BCC_A2", [1.0, yy, 1.0 - yy], T) * (1.0 + 3.0 * yy) - ideal(yy)

    def residual(s):
        y, h = math.exp(s), 1e-4
        d_rest = (-3.0 * rest(y) + 4.0 * rest(y + h) - rest(y + 2 * h)) / (2 * h)
        mu_c = (d_rest + 3.0 * R * T * (math.log(y) - math.log1p(-y))) / 3.0
        mu_fe = rest(y) + ideal(y) - 3.0 * y * mu_c
        return (3.0 * mu_fe + mu_c - g_cem) / (R * T)

    s = math.log(y0)
    for _ in range(20):  # secant iteration from our answer's neighbourhood
        f0, f1 = residual(s), residual(s + 1e-4)
        step = -f0 * 1e-4 / (f1 - f0)
        s += step
        if abs(step) < 1e-12:
            break
    return s


@pytest.mark.parametrize("T", [330.0, 380.0, 450.0, 560.0])
def test_dilute_boundary_matches_independent_root(T):
    # at these temperatures x spans about 1e-12 to 1e-7 on the bundled Fe-C database (cementite partner when
    # M7C3 is excluded too)
    ds = solubility.solvus("fe-c", "BCC_A2", "C", [T], exclude=[*METASTABLE, "M7C3_D101"])
    assert ds.partner.values[0] == "CEMENTITE_D011"
    y = float(ds.Y.values[0])
    s_ref = _independent_dilute_root(load_database("fe-c").db, T, y)
    # 1e-6 relative is asked down to x = 1e-12; the reference itself (a three-point difference of smooth terms,
    # h = 1e-4) is good to about 1e-10, and the two agree to about 5e-11, so 1e-8 still leaves a wide margin
    assert abs(math.log(y) - s_ref) < 1e-8
    assert T != 330.0 or float(ds.X.values[0]) < 1e-10  # the test really reaches the dilute end


def test_result_independent_of_temperature_step():
    coarse = solubility.solvus("fe-c", "BCC_A2", "C", "600:1100:100", exclude=METASTABLE)
    fine = solubility.solvus("fe-c", "BCC_A2", "C", "600:1100:12.5", exclude=METASTABLE)
    fine_at = fine.sel(T=coarse["T"].values)
    np.testing.assert_allclose(coarse.X.values, fine_at.X.values, rtol=1e-9)
    assert list(coarse.partner.values) == list(fine_at.partner.values)
    np.testing.assert_allclose(coarse.partner_change_T.values, fine.partner_change_T.values, atol=0.01)


def test_every_returned_point_is_checked_against_all_candidates():
    ds = solubility.solvus("fe-c", "BCC_A2", "C", "500:1150:50", exclude=METASTABLE)
    ok = ds.status.values == "ok"
    assert ok.sum() >= 12
    assert np.all(ds.DF_OTHER.values[ok] <= 1e-4)  # no other phase more stable at the boundary


def test_partner_change_bracketed():
    ds = solubility.solvus("fe-c", "BCC_A2", "C", "980:1020:10", exclude=METASTABLE)
    (T_star,) = ds.partner_change_T.values
    below = solubility.solvus("fe-c", "BCC_A2", "C", [T_star - 0.02], exclude=METASTABLE)
    above = solubility.solvus("fe-c", "BCC_A2", "C", [T_star + 0.02], exclude=METASTABLE)
    assert below.partner.values[0] == ds.partner_below.values[0] == "CEMENTITE_D011"
    assert above.partner.values[0] == ds.partner_above.values[0] == "FCC_A1"
    # the host composition is continuous through the change; 0.02 K away it moves by |d ln x/dT| * 0.02 K,
    # about 2e-4 on the cementite side and 5e-4 on the austenite side, hence 1e-3
    np.testing.assert_allclose(below.X.values[0], ds.partner_change_X.values[0], rtol=1e-3)
    np.testing.assert_allclose(above.X.values[0], ds.partner_change_X.values[0], rtol=1e-3)


def test_temperatures_keep_the_given_order():
    ds = solubility.solvus("fe-c", "BCC_A2", "C", [900.0, 700.0, 800.0], exclude=METASTABLE)
    assert list(ds["T"].values) == [900.0, 700.0, 800.0]
    assert ds.X.values[1] < ds.X.values[2] < ds.X.values[0]


def test_celsius_input():
    k = solubility.solvus("fe-c", "BCC_A2", "C", [873.15], exclude=METASTABLE)
    c = solubility.solvus("fe-c", "BCC_A2", "C", "600:600:1", exclude=METASTABLE, celsius=True)
    np.testing.assert_allclose(k.X.values, c.X.values, rtol=1e-12)
    assert float(c.T_C.values[0]) == pytest.approx(600.0)
