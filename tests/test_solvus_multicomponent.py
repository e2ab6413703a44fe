"""A multicomponent solvus at a fixed u-fraction, checked by a second method with pycalphad's public API.

System: the bundled Fe-C database (Hallstedt et al. 2010) extended in the test by a substitutional element M on
the metal sublattices of BCC_A2 and CEMENTITE_D011. M and ALL OF ITS PARAMETERS ARE INVENTED for this test (M is
Fe with +3 kJ/mol in ferrite and -12 kJ/mol in cementite, and a -8 kJ/mol Fe-M interaction in ferrite) so that M
partitions strongly to the carbide and the tie lines rotate. The reference value is not invented: it is what
pycalphad's own global equilibrium gives.

Second method: along the line of fixed u(M) = x_M / (x_FE + x_M), pycalphad's equilibrium at overall compositions
just past the solvus has a small amount of cementite, which vanishes linearly (plus curvature) as the overall C
content falls to the solvus. Where it vanishes the host is the whole system, so the overall composition there is
the host composition at which the partner appears, the quantity `solvus` returns. A quadratic through three
points past the boundary locates that root to about 1e-7 relative (pycalphad's phase amounts are good to about
1e-10 absolute), hence the tolerance of 1e-5. Reading the host composition out of a two-phase equilibrium at a
fixed overall composition instead would give a different, wrong number (checked below too).
"""

from __future__ import annotations

import numpy as np
import pytest
from pycalphad import Database, equilibrium
from pycalphad import variables as v
from pycalphad.variables import Species

import solubility
from solubility.databases.reader import load_database

U_M = 0.03
T = 850.0
PHASES = ["BCC_A2", "CEMENTITE_D011"]


@pytest.fixture(scope="module")
def ternary():
    # a fresh parse: pycalphad's Database deepcopy shares phases with the original, so never mutate a copy of
    # the cached bundled database
    db = Database(str(load_database("fe-c").path))
    db.elements.add("M")
    db.species.add(Species("M"))
    db.refstates["M"] = {"phase": "BCC_A2", "mass": 50.0, "H298": 0.0, "S298": 0.0}  # invented
    extra = {"BCC_A2": 3000.0, "CEMENTITE_D011": -12000.0}  # invented, J/mol of M
    for phase, shift in extra.items():
        consts = [sorted(s.name for s in sub) for sub in db.phases[phase].constituents]
        consts[0] = sorted({*consts[0], "M"})
        db.add_phase_constituents(phase, consts)
        for p in list(db._parameters.all()):
            ca = p["constituent_array"]
            if p["phase_name"] != phase or tuple(s.name for s in ca[0]) != ("FE",):
                continue
            new_ca = [["M"]] + [[s.name for s in sub] for sub in ca[1:]]
            value = p["parameter"]
            if p["parameter_type"] == "G" and p["parameter_order"] == 0 and all(len(s) == 1 for s in ca):
                ratio = float(db.phases[phase].sublattices[0])
                value = value + ratio * shift
            db.add_parameter(p["parameter_type"], phase, new_ca, p["parameter_order"], value)
    db.add_parameter("L", "BCC_A2", [["FE", "M"], ["VA"]], 0, -8000.0)  # invented
    return db


def _overall(x_c):
    return {v.X("C"): x_c, v.X("M"): U_M * (1.0 - x_c)}


def _cementite_amount(db, x_c):
    eq = equilibrium(db, ["C", "FE", "M", "VA"], PHASES, {v.T: T, v.P: 101325, v.N: 1, **_overall(x_c)})
    names = list(eq.Phase.values.ravel())
    amounts = eq.NP.values.ravel()
    return float(sum(a for n, a in zip(names, amounts, strict=True) if n == "CEMENTITE_D011"))


def test_fixed_u_solvus_against_vanishing_partner(ternary):
    ds = solubility.solvus(ternary, "BCC_A2", "C", [T], exclude=["GRAPHITE", "DIAMOND_A4", "M7C3_D101",
                                                                   "FCC_A1", "HCP_A3", "LIQUID"],
                           fix={"M": U_M})
    assert ds.status.values[0] == "ok" and ds.partner.values[0] == "CEMENTITE_D011"
    x_star = float(ds.X.values[0])
    # just below the solvus the host is alone
    assert _cementite_amount(ternary, x_star * (1 - 1e-3)) == pytest.approx(0.0, abs=1e-12)
    deltas = np.array([2e-3, 4e-3, 6e-3])
    xs = x_star * (1 + deltas)
    amounts = np.array([_cementite_amount(ternary, x) for x in xs])
    assert np.all(amounts > 0)
    coeffs = np.polyfit(xs - x_star, amounts, 2)
    roots = np.roots(coeffs)
    root = min(roots.real, key=abs) + x_star
    assert abs(root - x_star) / x_star < 1e-5


def test_tie_line_reading_differs_when_tie_lines_rotate(ternary):
    # the "by hand" method: a two-phase equilibrium at a fixed overall composition, host composition read off;
    # with M partitioning to the carbide the host's u(M) is not the alloy's, so this is another quantity
    eq = equilibrium(ternary, ["C", "FE", "M", "VA"], PHASES, {v.T: T, v.P: 101325, v.N: 1, **_overall(0.02)})
    names = list(eq.Phase.values.ravel())
    k = names.index("BCC_A2")
    x = eq.X.values.reshape(len(names), -1)[k]
    comps = list(eq.component.values)
    u_host = x[comps.index("M")] / (x[comps.index("M")] + x[comps.index("FE")])
    assert abs(u_host - U_M) / U_M > 0.05
