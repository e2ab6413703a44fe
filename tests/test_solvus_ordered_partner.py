"""Ordered partners in their ordered state: C in austenite against kappa carbide (E21) at the upper end of the
austenite's field and against B2 ferrite at its lower end, checked against pycalphad's own equilibrium (reference
library, pycalphad 0.11.2) computed here at test time.

System: the bundled `steel` database (LibreCalphad mf-steel, M. Frichtl 2024; see solubility/databases/README.md).
Its kappa carbide is KAPPA_E21, (AL,FE,MN)0.25 x4 (C,VA)0.25, an E21 ordering of its disordered part KAPPA_A1
(AL,FE,MN)1(C,VA)0.25 (pycalphad builds it as a partitioned order-disorder model); the Al-C-Fe parameters are
from Connetable et al., Calphad 32 (2008) 361 (08CON) and Zheng et al., Calphad 58 (2017) 34 (17ZHEC), the Al-C-Mn
ones from Zheng et al., Calphad 60 (2018) 222 (18ZHEB), as the file's reference codes say. BCC_B2 is the B2
ordering over ferrite BCC_A2. The file's spurious fcc orderings (FCC_L12, FCC_L10, FCC2_L10) are excluded as its
README entry advises: with them pycalphad finds a single ordered FCC_L12 (Al on the 0.75 sublattice) at these
compositions, which is the database's known weakness, not kappa.

Physical case (from memory): kappa carbide, the perovskite-type (Fe,Mn)3AlC with Al on the cube corners and C in
the body-centre octahedron (E21), precipitates from the austenite of Fe-Al-C and Fe-Mn-Al-C steels of high Al
and C (the low-density steels) at about 700-1000 C.

Reference method (as in tests/test_real_databases.py and tests/test_solvus_multicomponent.py): pycalphad's global
equilibrium at an overall composition inside the austenite + kappa field gives the tie line. The partner takes Al
(and rejects Mn), so the austenite's u-fractions are not the alloy's: pycalphad's austenite u-fractions are given
to `solvus` as `fix`, and the austenite's C content there is the solvus (its lower end, X_LOW, for the
B2 tie line). Each test first checks, from pycalphad's site fractions, that the partner is in its ORDERED state
there (kappa: Al nearly all on one of the four metal sublattices; B2: Al unequal on its two).

Which phases: pycalphad's equilibrium here uses the phases that matter (austenite, kappa, graphite, B2/A2 ferrite,
cementite) to stay fast; an equilibrium over every candidate phase of the file (all but the excluded orderings,
GAS and the ionic liquid, about 16 s per point) gave the same two phases at all five points, checked by hand
while writing this test. `solvus` itself searches every candidate phase, so its agreement with pycalphad's tie
line also shows that no other phase of the file limits the austenite first.

Tolerance: 1e-6 relative on the host's C content (the standard of the other reference tests: pycalphad converges
far tighter, and both sides evaluate the same Gibbs energy functions). The partner's composition is compared to
1e-6 absolute in mole fraction (it is the optimum of the partner's driving force, which is flat to second order
there, so it is the looser of the two quantities; measured agreement was about 1e-14).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from pycalphad import Model, equilibrium
from pycalphad import variables as v

import solubility

#: the spurious fcc orderings of the file (solubility/databases/README.md, "Known weaknesses") and the gas
EXCLUDE = ["FCC_L12", "FCC_L10", "FCC2_L10", "GAS"]
#: the phases pycalphad's reference equilibrium uses (see the module docstring)
PHASES = ["FCC_A1", "KAPPA_E21", "GRAPHITE_A9", "BCC_B2", "CEMENTITE_D011"]
HOST, KAPPA, B2 = "FCC_A1", "KAPPA_E21", "BCC_B2"


def _tie_line(db, comps: list[str], T: float, overall: dict[str, float], partner: str) -> dict[str, tuple]:
    """Phase -> (mole fractions by element, the partner's Al site fraction on each metal sublattice) of
    pycalphad's equilibrium."""
    conds = {v.T: T, v.P: 101325, v.N: 1, **{v.X(el): x for el, x in overall.items()}}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # pycalphad's caution on magnetic order-disorder models
        eq = equilibrium(db, comps, PHASES, conds)
        site_vars = Model(db, comps, partner).site_fractions
    names = [str(n) for n in eq.Phase.values.ravel()]
    elements = [str(c) for c in eq.component.values]
    xs = eq.X.values.reshape(len(names), -1)
    ys = eq.Y.values.reshape(len(names), -1)
    out = {}
    for i, name in enumerate(names):
        if not name:
            continue
        assert name not in out, names  # one composition set of each phase
        x = dict(zip(elements, (float(a) for a in xs[i]), strict=True))
        y_al = [float(ys[i, k]) for k, sf in enumerate(site_vars) if sf.species.name == "AL"] if name == partner else []
        out[name] = (x, y_al)
    return out


def _solvus_at_host(x_host: dict[str, float], comps: list[str], T: float):
    """solubility's solvus at pycalphad's austenite u-fractions."""
    metals = [el for el in comps if el not in ("C", "VA")]
    m = sum(x_host[el] for el in metals)
    fix = {el: x_host[el] / m for el in metals if el != "FE"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # pycalphad's caution above and the database's notes
        return solubility.solvus("steel", HOST, "C", [T], fix=fix, balance="FE", exclude=EXCLUDE)


def _kappa_check(db, comps: list[str], T: float, overall: dict[str, float]) -> None:
    tie = _tie_line(db, comps, T, overall, KAPPA)
    assert sorted(tie) == [HOST, KAPPA]  # inside the austenite + kappa field
    x_host, _ = tie[HOST]
    x_kappa, y_al = tie[KAPPA]
    # kappa in its ORDERED state: Al nearly all on one of the four metal sublattices (E21), not spread evenly
    assert len(y_al) == 4 and max(y_al) > 0.75 and sorted(y_al)[-2] < 0.01, y_al
    assert x_kappa["C"] > 0.1  # a carbide: C fills much of its octahedral site (at most 0.2 of the atoms)

    ds = _solvus_at_host(x_host, comps, T)
    assert ds.status.values[0] == "ok"
    assert ds.partner.values[0] == KAPPA  # reported under its own name: its optimum is ordered
    assert float(ds.X.values[0]) == pytest.approx(x_host["C"], rel=1e-6)
    partner_x = ds.PARTNER_X.sel(component=list(x_kappa)).values[0]
    np.testing.assert_allclose(partner_x, list(x_kappa.values()), rtol=0, atol=1e-6)


@pytest.mark.parametrize("T", [1173.0, 1273.0])
def test_carbon_in_austenite_against_kappa_e21_fe_al_c(steel_db, T):
    """Fe-15Al-8C (at.%; about Fe-8.4Al-2.0C wt.%) at 900 and 1000 C: austenite + kappa carbide (pycalphad's
    equilibrium); at 1273 K the ordering sits on another of the four equivalent sublattices than at 1173 K."""
    _kappa_check(steel_db.db, ["AL", "C", "FE", "VA"], T, {"AL": 0.15, "C": 0.08})


@pytest.mark.slow
def test_carbon_in_austenite_against_kappa_e21_fe_mn_al_c(steel_db):
    """Fe-17Mn-16Al-12C (at.%; about Fe-20Mn-9Al-3C wt.%) at 800 C, a low-density steel composition with more C
    than the real steels' about 1 wt.%: austenite + kappa carbide (pycalphad's equilibrium), two u-fractions
    fixed (Al and Mn)."""
    _kappa_check(steel_db.db, ["AL", "C", "FE", "MN", "VA"], 1073.0, {"AL": 0.16, "MN": 0.17, "C": 0.12})


@pytest.mark.parametrize(("T", "x_c"), [(1173.0, 0.05), (1273.0, 0.04)])
def test_lower_end_of_austenite_against_b2_ferrite_fe_al_c(steel_db, T, x_c):
    """The other end of the same austenite field: at lower C the austenite meets B2-ordered ferrite (BCC_B2 over
    BCC_A2), the field's lower end (X_LOW, partner_low), checked on pycalphad's austenite + B2 tie line. The B2
    order here is the database's as pycalphad builds it (pycalphad cautions that the magnetic term of BCC_B2 is
    not partitioned); whether real ferrite of this composition is B2-ordered at these temperatures is not claimed,
    the check is of the engine against pycalphad on the same file."""
    comps = ["AL", "C", "FE", "VA"]
    tie = _tie_line(steel_db.db, comps, T, {"AL": 0.15, "C": x_c}, B2)
    assert sorted(tie) == [B2, HOST]  # inside the austenite + ferrite field
    x_host, y_al = tie[HOST][0], tie[B2][1]
    assert len(y_al) == 2 and abs(y_al[0] - y_al[1]) > 0.1, y_al  # ordered: Al prefers one sublattice
    ds = _solvus_at_host(x_host, comps, T)
    assert ds.status_low.values[0] == "ok"
    assert ds.partner_low.values[0] == B2  # its own name: the optimum is ordered
    assert float(ds.X_LOW.values[0]) == pytest.approx(x_host["C"], rel=1e-6)
    # the upper end of the same field is kappa (austenite + kappa at higher C, the tests above)
    assert ds.status.values[0] == "ok" and ds.partner.values[0] == KAPPA
    assert float(ds.X.values[0]) > float(ds.X_LOW.values[0])
