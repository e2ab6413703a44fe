"""Assessed databases as alloy developers use them: order-disorder hosts, the host's own second composition set,
charged partners and missing parameters, each checked against pycalphad's own equilibrium (reference library,
pycalphad 0.11.2) computed here at test time.

Reference method in a binary: inside a two-phase field pycalphad's equilibrium at an overall composition gives the
tie line; its host end is the solvus (the host's composition there, read from pycalphad's result). The tolerance is
1e-6 relative (the issue's requirement): pycalphad's equilibrium converges its site fractions far tighter than that
at these contents (x > 1e-7), and both sides evaluate the same Gibbs energy functions.
"""

from __future__ import annotations

import os
import warnings

import numpy as np
import pytest
from pycalphad import Database, equilibrium
from pycalphad import variables as v
from pycalphad.tests import databases as pycalphad_test_databases

import solubility
from solubility.errors import InputError

PYCALPHAD_DBS = os.path.dirname(pycalphad_test_databases.__file__)

#: An INVENTED system (not a reference value): a host (FE)1(C,VA)1 with a symmetric regular interaction of
#: +30 kJ/mol between C and VA, so its miscibility gap at 800 K has its ends at y = 0.01212 and 0.98788, and a
#: pure-C phase at +3 kJ/mol, which would limit the host at y = 0.0203 if the gap were ignored.
INVENTED_GAP_TDB = """
TYPE_DEFINITION % SEQ * !
ELEMENT VA VACUUM 0 0 0 !
ELEMENT FE BCC_A2 55.845 4489 27.28 !
ELEMENT C GRAPHITE 12.011 1054 5.74 !
PHASE HOST % 2 1 1 !
CONSTITUENT HOST : FE : C,VA : !
PARAMETER G(HOST,FE:VA;0) 298.15 0; 6000 N !
PARAMETER G(HOST,FE:C;0) 298.15 0; 6000 N !
PARAMETER L(HOST,FE:C,VA;0) 298.15 30000; 6000 N !
PHASE CPURE % 1 1 !
CONSTITUENT CPURE : C : !
PARAMETER G(CPURE,C;0) 298.15 3000; 6000 N !
"""


def _pycalphad_db(name: str) -> Database:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pycalphad warns about type-definition characters in these files
        return Database(os.path.join(PYCALPHAD_DBS, name))


def _host_end(db, comps, phases, T, solute, x_overall, host):
    """Solute mole fraction of the host's end of the tie line at overall content x_overall (binary)."""
    eq = equilibrium(db, comps, phases, {v.T: T, v.P: 101325, v.N: 1, v.X(solute): x_overall})
    names = [str(n) for n in eq.Phase.values.ravel()]
    k = list(eq.component.values).index(solute)
    xs = eq.X.values.reshape(len(names), -1)[:, k]
    ends = [float(xs[i]) for i, n in enumerate(names) if n == host]
    assert len([n for n in names if n]) == 2, names  # inside the two-phase field
    return min(ends)


def test_invented_gap_partner_is_the_hosts_second_composition_set():
    db = Database(INVENTED_GAP_TDB)
    ref = _host_end(db, ["C", "FE", "VA"], ["HOST", "CPURE"], 800.0, "C", 0.3, "HOST")
    y_ref = ref / (1.0 - ref)  # (FE)1(C,VA)1: x = y / (1 + y)
    assert y_ref == pytest.approx(0.01212, abs=1e-5)  # the number (regular-solution binodal)
    ds = solubility.solvus(db, "HOST", "C", [800.0])
    assert ds.status.values[0] == "ok"
    assert ds.partner.values[0] == "HOST#2"
    assert float(ds.PARTNER_X.sel(component="C").values[0]) == pytest.approx(0.98788 / 1.98788, rel=1e-4)
    assert float(ds.Y.values[0]) == pytest.approx(y_ref, rel=1e-6)


def test_cost507_austenite_with_carbon_is_refused_naming_the_parameter():
    db = _pycalphad_db("COST507.tdb")
    with pytest.raises(InputError, match=r"^host phase FCC_A1 has no G\(FCC_A1,FE:C;0\) in the database"):
        solubility.solvus(db, "FCC_A1", "C", [1273.15], balance="FE")


@pytest.mark.parametrize(("T", "partner"), [(800.0, "SPINEL_B"), (1000.0, "HALITE")])
def test_oxygen_in_ferrite_against_charged_oxides(T, partner):
    """O in ferrite (BCC_A2 (AL,FE)1(O,VA)3 under BCC_B2) against magnetite (SPINEL_B) below the wustite
    eutectoid and wustite (HALITE) above it, pycalphad's open alfeo.tdb; both partners are ionic (FE+2, FE+3,
    O-2) and must stay electrically neutral."""
    db = _pycalphad_db("alfeo.tdb")
    ref = _host_end(db, ["FE", "O", "VA"], ["BCC_A2", partner], T, "O", 0.3, "BCC_A2")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        ds = solubility.solvus(db, "BCC_A2", "O", [T], exclude=["GAS"], balance="FE")
    assert ds.status.values[0] == "ok"
    assert ds.partner.values[0] == partner
    assert float(ds.X.values[0]) == pytest.approx(ref, rel=1e-6)


def test_nitrogen_in_ferrite_against_fe4n_on_steel(steel_db):
    ldb = steel_db
    ref = _host_end(ldb.db, ["FE", "N", "VA"], ["BCC_A2", "FE4N_LP10"], 800.0, "N", 0.1, "BCC_A2")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        ds = solubility.solvus("steel", "BCC_A2", "N", [800.0], exclude=["GAS"], balance="FE")
    assert ds.status.values[0] == "ok"
    assert ds.partner.values[0] == "FE4N_LP10"
    assert float(ds.X.values[0]) == pytest.approx(ref, rel=1e-6)


def test_carbon_in_nb_microalloyed_austenite_against_nbc_on_steel(steel_db):
    """C in austenite at u(Nb) = 0.0005, balance Fe, 1273 K, graphite allowed, the spurious FCC_L12 and FCC2_L10
    orderings excluded: the partner is the FCC second composition set (NbC-rich). Reference: pycalphad's
    equilibrium along the line of fixed u(Nb) just past the boundary, where the NbC-rich set's amount vanishes
    (the method of test_solvus_multicomponent)."""
    ldb = steel_db
    u_nb, T = 0.0005, 1273.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        ds = solubility.solvus("steel", "FCC_A1", "C", [T], fix={"NB": u_nb}, balance="FE",
                               exclude=["FCC_L12", "FCC2_L10", "GAS"])
    assert ds.status.values[0] == "ok"
    assert ds.partner.values[0] == "FCC_A1#2"
    x_star = float(ds.X.values[0])

    def nbc_amount(x_c):
        eq = equilibrium(ldb.db, ["C", "FE", "NB", "VA"], ["FCC_A1", "GRAPHITE_A9", "CEMENTITE_D011"],
                         {v.T: T, v.P: 101325, v.N: 1, v.X("C"): x_c, v.X("NB"): u_nb * (1.0 - x_c)})
        names = [str(n) for n in eq.Phase.values.ravel()]
        amounts = eq.NP.values.ravel()
        xnb = eq.X.sel(component="NB").values.ravel()
        return float(sum(a for n, a, xn in zip(names, amounts, xnb, strict=True) if n == "FCC_A1" and xn > 0.1))

    assert nbc_amount(x_star * (1 - 1e-3)) == pytest.approx(0.0, abs=1e-12)
    xs = x_star * (1 + np.array([2e-3, 4e-3, 6e-3]))
    amounts = np.array([nbc_amount(x) for x in xs])
    assert np.all(amounts > 0)
    roots = np.roots(np.polyfit(xs - x_star, amounts, 2))
    root = min(roots.real, key=abs) + x_star
    assert abs(root - x_star) / x_star < 1e-6
