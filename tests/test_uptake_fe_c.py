"""Uptake at a fixed carbon activity on the bundled fe-c database (Hallstedt et al. 2010).

Checks against things outside the uptake engine: the exact graphite solvus of `solubility.solvus` (same database;
at a_C = 1 against graphite the austenite's content is its graphite solvus by definition) and pycalphad's own
equilibrium with a fixed chemical potential of C (reference library). Both sides solve the same equations on
the same database, so the tolerances are solver tolerances: 1e-9 and 1e-8 relative (the engine's Newton step in
ln y stops below 1e-13; pycalphad converges to about 1e-11 here).
"""

from __future__ import annotations

import numpy as np
import pytest
from pycalphad import calculate, equilibrium
from pycalphad import variables as v

import solubility
from solubility.databases.reader import load_database

T_GAMMA = [1050.0, 1150.0, 1250.0, 1350.0]  # austenite + graphite field of the stable Fe-C diagram


def test_activity_one_equals_graphite_solvus():
    up = solubility.uptake("fe-c", "FCC_A1", "C", T_GAMMA, activity=1.0)
    sv = solubility.solvus("fe-c", "FCC_A1", "C", T_GAMMA)
    assert list(sv.partner.values) == ["GRAPHITE"] * 4
    assert list(up.status.values) == ["ok"] * 4
    np.testing.assert_allclose(up.X.values, sv.X.values, rtol=1e-9, atol=0)
    np.testing.assert_allclose(up.activity.values, 1.0, rtol=1e-12)
    assert up.attrs["reference"] == "GRAPHITE"


def test_named_reference_equals_default():
    a = solubility.uptake("fe-c", "FCC_A1", "C", [1200.0], activity=0.3)
    b = solubility.uptake("fe-c", "FCC_A1", "C", [1200.0], activity=0.3, reference="GRAPHITE")
    np.testing.assert_allclose(a.X.values, b.X.values, rtol=1e-12)


@pytest.mark.parametrize("T", [1100.0, 1250.0, 1400.0])
def test_half_activity_against_pycalphad_fixed_potential(T):
    db = load_database("fe-c").db
    up = solubility.uptake("fe-c", "FCC_A1", "C", [T], activity=0.5)
    g_graphite = float(calculate(db, ["C"], "GRAPHITE", T=T, P=101325, N=1).GM.values.squeeze())
    mu_c = g_graphite + 8.3145 * T * np.log(0.5)  # pycalphad's R
    eq = equilibrium(db, ["C", "FE", "VA"], ["FCC_A1"], {v.T: T, v.P: 101325, v.N: 1, v.MU("C"): mu_c})
    x_ref = float(np.ravel(eq.X.sel(component="C").values)[0])
    assert up.status.values[0] == "ok"
    np.testing.assert_allclose(up.X.values[0], x_ref, rtol=1e-8, atol=0)


def test_metastable_host_names_what_forms():
    # a_C = 2 against graphite: graphite forms (a fact of the definition); below the graphite eutectoid
    # (1011 K, 738 C, common practice, no source) ferrite is the stable iron phase at a_C = 1
    up = solubility.uptake("fe-c", "FCC_A1", "C", [1000.0, 1200.0], activity=2.0)
    assert list(up.status.values) == ["metastable", "metastable"]
    assert up.forms_instead.values[1].split("+")[0] == "GRAPHITE"
    assert np.all(np.isfinite(up.X.values))  # the host keeps its number
    low = solubility.uptake("fe-c", "FCC_A1", "C", [1000.0], activity=1.0)
    assert "BCC_A2" in low.forms_instead.values[0].split("+")
    assert "BCC_A2" in low.reason.values[0]


def test_relative_accuracy_independent_of_dilution():
    # in the dilute limit x is proportional to a_C (Henry's law): 1e-9 and 1e-12 give the same ratio
    up = solubility.uptake("fe-c", "FCC_A1", "C", [1200.0], activity=1e-9)
    up2 = solubility.uptake("fe-c", "FCC_A1", "C", [1200.0], activity=1e-12)
    np.testing.assert_allclose(up.X.values / up2.X.values, 1e3, rtol=1e-8)
