"""The surface map (solubility.surface_map) and uptake on a host with no partner phase.

References:
- the nitriding map's boundaries on the bundled steel database against pycalphad's own equilibrium (reference
  library): in a two-phase field of Fe-N the chemical potential of N is that of the boundary between the two
  phases at the surface. Tolerance 0.05 J/mol: pycalphad's equilibrium converges its potentials to about 1e-6
  relative (about 0.05 J/mol here); the map's boundaries are solved to 1e-12 in ln a.
- an example Fe-H model built with `solubility model`, whose end-member was chosen to reproduce the Sieverts
  correlation for hydrogen in alpha iron x_H/Fe = 0.00185 (p / MPa)^1/2 exp(-3440 K / T) (as quoted by Hirth,
  Metall. Trans. A 11 (1980) 861; recalled from memory, including the pressure unit). This is a consistency
  check of model, gas data and engine against the correlation the parameter was fitted to (the fit of
  1/2 G(H2) over 250-1300 K leaves 2.7 J/mol, so 0.5 % is allowed), not an independent reference.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from pycalphad import equilibrium
from pycalphad import variables as v

import solubility
from solubility.calc.surroundings import Surroundings, solute_potential
from solubility.cli.main import main
from solubility.constants import R
from solubility.errors import InputError

FE_H_ELEMENTS = """$ Element data for Fe-H (SGTE unary data, A. T. Dinsdale, Calphad 15 (1991) 317)
ELEMENT /-   ELECTRON_GAS    0.0      0.0     0.0 !
ELEMENT VA   VACUUM          0.0      0.0     0.0 !
ELEMENT FE   BCC_A2          55.847   4489.0  27.28 !
ELEMENT H    1/2_MOLE_H2(G)  1.00794  4234.0  65.34 !
FUNCTION GHSERFE 298.15 +1225.7+124.134*T-23.5143*T*LN(T)-.00439752*T**2
   -5.8927E-08*T**3+77359*T**(-1); 1811 Y
   -25383.581+299.31255*T-46*T*LN(T)+2.29603E+31*T**(-9); 6000 N !
PHASE BCC_A2 % 2 1 3 !
CONSTITUENT BCC_A2 :FE:VA: !
PARAMETER G(BCC_A2,FE:VA;0) 298.15 +GHSERFE#; 6000 N !
"""
FE_H_PARAMETER = ("G(BCC_A2,FE:H;0)=GHSERFE#+6*(24784.31+101.62831*T-13.458690*T*LN(T)-7.8613E-04*T**2"
                  "-40450.7*T**(-1))")


@pytest.fixture(scope="module")
def fe_h(tmp_path_factory):
    folder = tmp_path_factory.mktemp("feh")
    (folder / "el.tdb").write_text(FE_H_ELEMENTS)
    out = folder / "fe-h.tdb"
    assert main(["model", "bcc", "--host", "FE", "--solute", "H", "--site", "tetrahedral", "--with-elements",
                 str(folder / "el.tdb"), "--output", str(out), "--parameter", "G(BCC_A2,FE:VA;0)=GHSERFE#",
                 "--parameter", FE_H_PARAMETER]) == 0
    return out


def test_fe_h_example_reproduces_its_sieverts_correlation(fe_h):
    T = np.array([300.0, 500.0, 800.0, 1100.0])
    ds = solubility.uptake(str(fe_h), "BCC_A2", "H", T, partial_pressure=1e5)  # no partner phase: allowed
    assert list(ds.status.values) == ["ok"] * 4
    r = 0.00185 * math.sqrt(0.1) * np.exp(-3440.0 / T)
    np.testing.assert_allclose(ds.X.values, r / (1 + r), rtol=5e-3)
    assert ds.attrs["sieverts_enthalpy_J_per_mol"] == pytest.approx(R * 3440.0, rel=5e-3)


def test_fe_h_map_and_cli(fe_h, tmp_path, capsys):
    ds = solubility.surface_map(str(fe_h), "BCC_A2", "H", [400.0, 800.0], points=8)
    assert ds.attrs["quantity"] == "p_X2" and set(ds.phase.values.ravel()) == {"BCC_A2"}
    np.testing.assert_allclose(ds.lower.values.ravel(), 1e2, rtol=1e-12)  # the default range
    png = tmp_path / "map.png"
    assert main(["uptake", str(fe_h), "--phase", "BCC_A2", "--solute", "H", "--temperatures", "400,800",
                 "--partial-pressure", "1e5", "--map", str(png), "--quiet"]) == 0
    assert png.stat().st_size > 10000
    bad = tmp_path / "map.txt"
    assert main(["uptake", str(fe_h), "--phase", "BCC_A2", "--solute", "H", "--temperatures", "400",
                 "--partial-pressure", "1e5", "--map", str(bad)]) == 2
    assert not bad.exists() and "--map" in capsys.readouterr().err
    with pytest.raises(InputError, match="map quantity 'K_N'"):
        solubility.surface_map(str(fe_h), "BCC_A2", "H", [400.0], quantity="K_N")


def test_nitriding_map_boundaries_against_pycalphad(steel_db):
    T = 773.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        ds = solubility.surface_map("steel", "BCC_A2", "N", [T], phases=["FE4N_LP10", "HCP_A3"], balance="FE",
                                    quantity="activity", limits=(1.0, 1e4))
    phases = [str(p) for p in ds.phase.values[0] if p]
    assert phases == ["BCC_A2", "FE4N_LP10", "HCP_A3"]
    pot = solute_potential(steel_db, "N", Surroundings("activity", 1.0), 101325.0)
    mu_edges = pot.ref_gibbs(T) + R * T * np.log(ds.upper_activity.values[0, :2])
    for k, (pair, x_n) in enumerate(((["BCC_A2", "FE4N_LP10"], 0.05), (["FE4N_LP10", "HCP_A3"], 0.22))):
        eq = equilibrium(steel_db.db, ["FE", "N", "VA"], pair, {v.T: T, v.P: 101325, v.N: 1, v.X("N"): x_n})
        assert sorted(str(p) for p in eq.Phase.values.ravel() if p) == sorted(pair)
        mu_n = float(eq.MU.sel(component="N").values.ravel()[0])
        assert mu_edges[k] == pytest.approx(mu_n, abs=0.05), pair
