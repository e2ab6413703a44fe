"""Order-disorder resolution and database gaps, on pycalphad's open test databases (shipped with pycalphad 0.11.2).

The claim behind computing a host named BCC_A2 from the disordered phase's own model: pycalphad's partitioned
model of the ordered phase, in its disordered state (equal site fractions on the ordering sublattices), has the
Gibbs energy of the disordered phase at the same composition. Checked here with pycalphad's own `calculate` on
both models (reference library); 1e-9 relative is double-precision agreement of two evaluations of one
expression tree.
"""

from __future__ import annotations

import os
import warnings

import numpy as np
import pytest
from pycalphad import Database, calculate
from pycalphad.tests import databases as pycalphad_test_databases

from solubility.thermo.checks import missing_endmembers
from solubility.thermo.ordering import choose_phases, order_families, ordering_sublattices

DBS = os.path.dirname(pycalphad_test_databases.__file__)


def _db(name):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return Database(os.path.join(DBS, name))


def test_families_and_ordering_sublattices():
    db = _db("alfeo.tdb")
    assert order_families(db) == {"BCC_A2": ("BCC_B2",)}
    assert ordering_sublattices(db, "BCC_B2", ["AL", "FE", "O"]) == (0, 1)
    assert ordering_sublattices(db, "BCC_A2", ["AL", "FE", "O"]) == ()


def test_disordered_host_kept_and_ordered_phase_stays_a_candidate():
    db = _db("alcfe_b2.tdb")
    for named in ("A2_BCC", "B2_BCC"):  # the user may name either
        choice = choose_phases(db, ["AL", "C", "FE"], named)
        assert choice.host == "A2_BCC"
        assert choice.host_family == ("B2_BCC",)
        assert set(choice.candidates) == {"A2_BCC", "B2_BCC"}
    assert choose_phases(db, ["AL", "C", "FE"], "A2_BCC", excluded=["B2_BCC"]).candidates == ("A2_BCC",)


def test_unbuildable_ordered_description_falls_back_to_the_disordered_phase():
    # COST507's BCC_B2 has only VA on its third sublattice while BCC_A2 takes C there: pycalphad cannot build it
    db = _db("COST507.tdb")
    choice = choose_phases(db, ["C", "FE"], "BCC_A2")
    assert "BCC_B2" not in choice.candidates and "BCC_A2" in choice.candidates
    assert any("BCC_B2" in w and "BCC_A2 is used alone" in w for w in choice.warnings)


def test_ordered_phase_in_disordered_state_equals_disordered_phase():
    db = _db("alfeo.tdb")
    comps = ["AL", "FE", "O", "VA"]
    rng = np.random.default_rng(7)
    x_al = rng.uniform(0.01, 0.6, 12)
    y_o = 10 ** rng.uniform(-8, -1, 12)
    dis = np.column_stack([x_al, 1 - x_al, y_o, 1 - y_o])  # BCC_A2: (AL,FE)1(O,VA)3
    ordered = np.column_stack([x_al, 1 - x_al, x_al, 1 - x_al, y_o, 1 - y_o])  # BCC_B2, equal sublattices
    for T in (700.0, 1300.0):
        g_dis = calculate(db, comps, "BCC_A2", T=T, P=101325, N=1, points=dis).GM.values.ravel()
        g_ord = calculate(db, comps, "BCC_B2", T=T, P=101325, N=1, points=ordered).GM.values.ravel()
        np.testing.assert_allclose(g_ord, g_dis, rtol=1e-9)


def test_missing_endmembers():
    db = _db("COST507.tdb")
    assert missing_endmembers(db, "FCC_A1", ["C", "FE"]) == ["G(FCC_A1,FE:C;0)"]
    # COST507 has no interstitial end-members with Fe at all (checked here as a fact about that file) ...
    assert missing_endmembers(db, "BCC_A2", ["FE", "N"]) == ["G(BCC_A2,FE:N;0)"]
    # ... and has them with Ti
    assert missing_endmembers(db, "HCP_A3", ["N", "TI"]) == []
    assert missing_endmembers(_db("alfeo.tdb"), "HALITE", ["FE", "O"]) == []


@pytest.mark.parametrize("phase", ["BCC_B2"])
def test_ordered_phases_are_not_asked_for_end_members(phase):
    assert missing_endmembers(_db("alfeo.tdb"), phase, ["AL", "FE", "O"]) == []
