"""Sieverts' law on an ideal interstitial solution (FE)1(H,VA)3 built with the tool.

The data are invented (an ideal solution and a hydride that serves as a candidate, not an assessment). The
references are outside the engine: Sieverts' law x ~ sqrt(p) (the dilute limit of any solution of a diatomic gas,
a textbook fact), and the closed form of the ideal model `solubility.models.sublattice.dilute_solubility` with
the gas potential mu_H = 1/2 G(H2, T, 1 bar) + 1/2 R T ln(p / 1 bar) as the partner's energy.
Tolerances: 1e-6 relative for the sqrt(p) scaling (the issue's figure; the deviation from the law itself is of
the order of y, 1e-9 here), 1e-9 for the closed form (solver tolerance; both sides are exact).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import solubility
from solubility.models.closed_forms import dilute_solubility
from solubility.models.sublattice import SublatticeModel
from solubility.results.uptake_dataset import V_STP, sieverts_fit
from solubility.thermo.gas import nasa_gibbs

R = 8.3145
C = 3.0
HYDRIDE = 10000.0  # invented: G(HYD, FE:H) per formula unit FeH, relative to Fe and G_H = 0 of the database


def _db(A: float, B: float):
    from solubility.databases.reader import _parse_text

    m = SublatticeModel.from_ratios("SS", "FE", "H", a=1.0, c=C)
    els = {"FE": ("SS", 55.847, 0.0, 0.0), "H": ("1/2_MOLE_H2(GAS)", 1.008, 0.0, 0.0)}  # masses from memory
    text = m.tdb_block({"G(SS,FE:VA;0)": "0", "G(SS,FE:H;0)": f"{A}+{B}*T"}, elements=els)
    text += " PHASE HYD % 2 1 1 !\n CONSTITUENT HYD :FE:H: !\n"
    text += f" PARAMETER G(HYD,FE:H;0) 298.15 {HYDRIDE}; 6000 N !\n"
    db, _ = _parse_text(text, "invented ideal Fe-H")
    return db


def _mu_gas(T, p):
    return 0.5 * nasa_gibbs("H2", T) + 0.5 * R * T * math.log(p / 1e5)


@pytest.fixture(scope="module")
def dilute_db():
    return _db(200000.0, 20.0)  # invented: strongly endothermic, y about 1e-10 at 1 bar


@pytest.fixture(scope="module")
def filling_db():
    return _db(-200000.0, 30.0)  # invented: exothermic, the sublattice fills


def test_sqrt_p_in_the_dilute_limit(dilute_db):
    T = [600.0, 900.0]
    pressures = [1e2, 1e3, 1e4, 1e5, 1e6]
    xs = np.array([solubility.uptake(dilute_db, "SS", "H", T, partial_pressure=p).X.values for p in pressures])
    assert np.all(xs < 1e-6)
    ks = xs / np.sqrt(np.array(pressures))[:, None]
    np.testing.assert_allclose(ks, np.broadcast_to(ks[0], ks.shape), rtol=1e-6)


@pytest.mark.parametrize("p", [1e3, 1e5, 1e7])
def test_filling_host_matches_ideal_closed_form(filling_db, p):
    T = np.array([500.0, 800.0, 1100.0])
    ds = solubility.uptake(filling_db, "SS", "H", T, partial_pressure=p)
    ref = [dilute_solubility(t, -200000.0, 30.0, a=1.0, c=C, partner_solute=1.0, partner_A=_mu_gas(t, p))
           for t in T]
    y_ref = np.array([float(np.ravel(r.y)[0]) for r in ref])
    y_sieverts = np.array([float(np.ravel(r.y_henry)[0]) for r in ref])
    assert np.any(y_ref / y_sieverts < 0.9)  # the host fills: well away from Sieverts' law
    np.testing.assert_allclose(ds.Y.values, y_ref, rtol=1e-9)


def test_hydride_flagged_where_the_closed_form_says(filling_db):
    T = np.array([400.0, 700.0, 1000.0])
    ds = solubility.uptake(filling_db, "SS", "H", T, partial_pressure=1e7)
    for t, y, status in zip(T, ds.Y.values, ds.status.values, strict=True):
        mu_h = _mu_gas(t, 1e7)
        mu_fe = C * R * t * math.log1p(-y)  # ideal (FE)1(H,VA)3 with G(FE:VA) = 0
        df = (mu_fe + mu_h - HYDRIDE) / 2.0
        assert status == ("metastable" if df > 1e-4 else "ok"), (t, df)
        assert math.isfinite(y)


def test_sieverts_units_and_enthalpy(dilute_db):
    p = 2e5
    ds = solubility.uptake(dilute_db, "SS", "H", "600:1000:100", partial_pressure=p)
    W = ds.W.values
    # cm3 of H2 at 273.15 K and 1 atm per 100 g: moles of H per 100 g / 2 times the molar volume
    np.testing.assert_allclose(ds.KS_CM3.values, 100 * W / 1.008 / 2 * V_STP / math.sqrt(p / 101325), rtol=1e-12)
    np.testing.assert_allclose(ds.KS_PPM.values, W * 1e6 / math.sqrt(p / 1e5), rtol=1e-12)
    # the fit recovers an exact Arrhenius law
    T = np.linspace(500, 1000, 6)
    dH, K0, n = sieverts_fit(T, 3e-6 * np.exp(-28600.0 / (R * T)))
    assert n == 6 and abs(dH - 28600.0) < 1e-6 and abs(K0 / 3e-6 - 1) < 1e-10
    assert ds.attrs["sieverts_enthalpy_J_per_mol"] > 0  # endothermic solution (A > 0)
    assert "NASA" in ds.attrs["gas_data_source"]  # the invented database has no hydrogen function
