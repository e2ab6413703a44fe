"""The compiled-system cache: keyed by content, pressure and free parameters given at evaluation time.

Checks count compilations (`cache_info()["builds"]`), never time. References outside the code under test: the
exact closed form of an ideal interstitial solution (`solubility.models.sublattice.dilute_solubility`, itself
checked against pycalphad's equilibrium in test_model.py) and pycalphad's own `calculate` at the same pressure.
The ideal systems are invented (tests/ideal_systems.py), labelled as such, and serve as inputs only.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from ideal_systems import ideal_db

import solubility
from solubility.databases.reader import _parse_text
from solubility.errors import InputError
from solubility.models.closed_forms import dilute_solubility
from solubility.models.sublattice import SublatticeModel
from solubility.thermo.cache import CACHE_SIZE, cache_info, compiled_system, database_digest

T = np.array([400.0, 600.0, 800.0])  # K
#: the engine reproduces the closed form to about 1e-10 (test_solvus_closed_form.py); 1e-6 is the issue's figure
RTOL = 1e-6


def _closed_form(A: float, B: float = 10.0) -> np.ndarray:
    return dilute_solubility(T, A, B, a=1.0, c=3.0, partner_host=0.0, partner_solute=1.0, partner_A=0.0,
                             partner_B=0.0).y


def test_in_memory_database_changed_in_place_gives_the_new_answer():
    from tinydb import where

    db = ideal_db(3.0, 40000.0, 10.0, 0.0, 1.0, 0.0, 0.0)  # invented ideal (FE)1(C,VA)3 against pure C
    first = solubility.solvus(db, "SS", "C", T)
    np.testing.assert_allclose(first.Y.values, _closed_form(40000.0), rtol=RTOL)
    digest = database_digest(db)
    # change G(SS,FE:C;0) in place: 40000 + 10 T -> 50000 + 10 T
    db._parameters.remove((where("phase_name") == "SS") & (where("parameter_type") == "G")
                          & (where("constituent_array").test(lambda c: any(s.name == "C" for s in c[-1]))))
    from pycalphad.io.tdb import _sympify_string

    db.add_parameter("G", "SS", [["FE"], ["C"]], 0, _sympify_string("50000+10*T"), force_insert=True)
    assert database_digest(db) != digest
    second = solubility.solvus(db, "SS", "C", T)
    np.testing.assert_allclose(second.Y.values, _closed_form(50000.0), rtol=RTOL)
    assert np.all(second.Y.values < 0.9 * first.Y.values)  # a stale system would give the first answer


def test_equal_content_shares_one_compiled_system():
    a = ideal_db(3.0, 41000.0, 10.0, 0.0, 1.0, 0.0, 0.0)
    b = ideal_db(3.0, 41000.0, 10.0, 0.0, 1.0, 0.0, 0.0)  # a second, equal Database object
    assert a is not b and database_digest(a) == database_digest(b)
    elements, phases = ["C", "FE"], ["PARTNER", "SS"]
    assert compiled_system(a, elements, phases) is compiled_system(b, elements, phases)


def test_new_pressure_does_not_recompile_and_matches_pycalphad(cfe_tdb_path):
    """pycalphad's C-Fe database with the Brosh equation of state (pressure-dependent energies): a bound system
    at 5 GPa gives pycalphad's own `calculate` energies at 5 GPa, and binding it compiles nothing."""
    from pycalphad import Database, calculate

    db = Database(str(cfe_tdb_path))
    compiled = compiled_system(db, ["C", "FE"], ["BCC_A2", "FCC_A1"])
    builds = cache_info()["builds"]
    y = np.array([1.0, 0.01, 0.99])  # FE : C, VA
    for pressure in (101325.0, 5e9):
        bound = compiled.bind(pressure)
        for phase in ("BCC_A2", "FCC_A1"):
            ours = bound.gibbs(phase, y, 1200.0) / (1.0 + compiled.phases[phase].site_ratios[1] * y[1])
            ref = calculate(db, ["C", "FE", "VA"], phase, T=1200.0, P=pressure, N=1, points=y[None, :])
            # same compiled expressions at y = 0.01 (the exact-mixing model differs only below 1e-15):
            # double-precision agreement, 1e-9 relative leaves room for the order of summation
            assert ours == pytest.approx(float(ref.GM.values.squeeze()), rel=1e-9), (phase, pressure)
    assert compiled.bind(5e9).gibbs("BCC_A2", y, 1200.0) != compiled.bind(101325.0).gibbs("BCC_A2", y, 1200.0)
    assert cache_info()["builds"] == builds  # no pressure compiled anything


def _parameter_db():
    """Invented ideal (FE)1(C,VA)3 whose G(SS,FE:C;0) = VV1 + 10 T, VV1 a FUNCTION that can be left free."""
    m = SublatticeModel.from_ratios("SS", "FE", "C", a=1.0, c=3.0)
    els = {"FE": ("SS", 55.847, 0.0, 0.0), "C": ("PARTNER", 12.011, 0.0, 0.0)}
    text = " FUNCTION VV1 298.15 40000; 6000 N !\n FUNCTION VV2 298.15 1; 6000 N !\n"  # VV2: used nowhere
    text += m.tdb_block({"G(SS,FE:VA;0)": "0", "G(SS,FE:C;0)": "VV1+10*T"}, elements=els)
    text += " PHASE PARTNER % 1 1 !\n CONSTITUENT PARTNER :C: !\n PARAMETER G(PARTNER,C;0) 298.15 0; 6000 N !\n"
    db, _ = _parse_text(text, "invented parameter system")
    return db


def test_new_parameter_value_or_pressure_does_not_recompile():
    db = _parameter_db()
    ds = solubility.solvus(db, "SS", "C", T, parameters={"VV1": 40000.0})
    np.testing.assert_allclose(ds.Y.values, _closed_form(40000.0), rtol=RTOL)
    builds = cache_info()["builds"]
    for A in (45000.0, 52000.0):
        ds = solubility.solvus(db, "SS", "C", T, parameters={"vv1": A})  # names are case-insensitive
        np.testing.assert_allclose(ds.Y.values, _closed_form(A), rtol=RTOL)
        assert json.loads(ds.attrs["parameters"]) == {"VV1": A}
    solubility.solvus(db, "SS", "C", T, parameters={"VV1": 40000.0}, pressure=2e5)
    assert cache_info()["builds"] == builds
    # without the parameter the FUNCTION's own value applies (a separate system, compiled once)
    ds = solubility.solvus(db, "SS", "C", T)
    np.testing.assert_allclose(ds.Y.values, _closed_form(40000.0), rtol=RTOL)
    assert cache_info()["builds"] == builds + 1


@pytest.mark.parametrize(("parameters", "message"), [
    ({"NOPE": 1.0}, "NOPE is neither a FUNCTION"),
    ({"VV2": 1.0}, "VV2 appears in no Gibbs energy"),
    ({"VV1": float("nan")}, "not a finite number"),
    ({"VV1": "x"}, "not a number"),
    (["VV1"], "not a mapping"),
])
def test_bad_parameters_are_refused(parameters, message):
    with pytest.raises(InputError, match=message):
        solubility.solvus(_parameter_db(), "SS", "C", T, parameters=parameters)


def test_cache_is_bounded():
    for k in range(CACHE_SIZE + 3):
        compiled_system(ideal_db(3.0, 30000.0 + k, 0.0, 0.0, 1.0, 0.0, 0.0), ["C", "FE"], ["PARTNER", "SS"])
    info = cache_info()
    assert info["size"] == info["max_size"] == CACHE_SIZE
