"""The solvus engine against the exact closed form of an ideal interstitial solution (the models issue).

For an ideal (M)a(X,VA)c solution with end-member energy dG = A + B T against a partner M_p X_q, the boundary
solves q ln y + (p c / a - q) ln(1 - y) = (dGf - q dG / c) / (R T) exactly
(`solubility.models.sublattice.dilute_solubility`, itself checked against pycalphad's equilibrium in test_model.py).
The systems are built by the tool from
invented ideal data (tests/ideal_systems.py); the temperatures are chosen so that y runs from about 1e-2 down to
below 1e-12, where pycalphad's own global equilibrium can no longer resolve the composition. Tolerance 1e-6
relative, the issue's figure; the engine's error is about 1e-10 (the noise of double-precision energies).
"""

from __future__ import annotations

import numpy as np
import pytest
from ideal_systems import IDEAL_CASES, ideal_db

import solubility
from solubility.models.closed_forms import dilute_solubility


@pytest.mark.parametrize(("c", "A", "B", "p", "q", "GA", "GB"), IDEAL_CASES)
def test_solvus_matches_closed_form_from_dilute_to_concentrated(c, A, B, p, q, GA, GB):
    db = ideal_db(c, A, B, p, q, GA, GB)
    temperatures = np.array([50.0, 70.0, 100.0, 150.0, 400.0, 1000.0])
    ref = dilute_solubility(temperatures, A, B, a=1.0, c=c, partner_host=p, partner_solute=q,
                            partner_A=GA, partner_B=GB)
    ds = solubility.solvus(db, "SS", "C", temperatures)
    inside = ref.y > 1e-30  # the engine searches down to a site fraction of 1e-30 and flags what lies below
    assert list(ds.status.values) == ["ok" if k else "below_limit" for k in inside]
    assert set(ds.partner.values[inside]) == {"PARTNER"}
    assert np.all(np.isnan(ds.Y.values[~inside]))
    np.testing.assert_allclose(ds.Y.values[inside], ref.y[inside], rtol=1e-6)
    np.testing.assert_allclose(ds.X.values[inside], ref.x[inside], rtol=1e-6)
    assert ref.y[inside].min() < 1e-12  # the check reaches the dilute end the issue asks for


def test_apparent_enthalpy_of_an_ideal_dilute_solution():
    # pure-solute partner, ideal (M)1(X,VA)3 with dG = A (B = 0): y/(1-y) = exp(-A/(3RT)), and in the dilute
    # limit x = 3y/(1+3y) ~ 3y, so ln x = ln 3 - A/(3RT) and Q = -R dln(x)/d(1/T) = A/3 exactly as y -> 0
    from solubility.results.plotting import apparent_enthalpy

    A = 60000.0
    db = ideal_db(3.0, A, 0.0, 0.0, 1.0, 0.0, 0.0)
    ds = solubility.solvus(db, "SS", "C", "150:250:10")
    assert float(ds.Y.max()) < 1e-4
    fit = apparent_enthalpy(ds)
    # the O(y) departure from the dilute form is below 1e-4 here; 1e-3 relative leaves room for it
    assert fit["Q"] == pytest.approx(A / 3.0, rel=1e-3)
    assert fit["partner"] == "PARTNER" and fit["points"] == 11
