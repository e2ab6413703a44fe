"""Complete model files: `solubility model --output` loads in pycalphad on its own; site-ratio conversion.

References: pycalphad 0.11.2's own Database reader and `calculate` (reference library); the bundled fe-c database
(Hallstedt et al., Calphad 34 (2010) 129; SGTE unary data, Dinsdale, Calphad 15 (1991) 317).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from solubility.cli.main import main
from solubility.databases.extend import add_model
from solubility.databases.reader import load_database
from solubility.models.sublattice import SublatticeModel

_TS = np.array([300.0, 700.0, 1000.0, 1043.0, 1200.0])


def _energies(db, phase, points):
    from pycalphad import calculate

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calculate(db, ["FE", "C", "VA"], phase, T=_TS, P=101325, points=points, N=1)
    return np.asarray(res.GM.values).squeeze()


def _pycalphad_db(path):
    from pycalphad import Database

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return Database(str(path))


def test_model_output_loads_alone_and_matches_in_memory_model(tmp_path, capsys):
    # round trip: model --output -> pycalphad Database -> same ratios, constituents, Gibbs energies (magnetic
    # included) as the in-memory model of add_model; parameters use the database's FUNCTIONs (GA2FE#)
    target = tmp_path / "m.tdb"
    params = ["G(BCC_TEST,FE:VA;0)=GA2FE#", "G(BCC_TEST,FE:C;0)=GA2FE#+3*GA9C#+322050+75.667*T",
              "TC(BCC_TEST,FE:VA;0)=1043", "BMAGN(BCC_TEST,FE:VA;0)=2.22"]
    args = ["model", "bcc", "--host", "FE", "--solute", "C", "--phase", "BCC_TEST", "--output", str(target)]
    for p in params:
        args += ["--parameter", p]
    assert main(args) == 0
    db = _pycalphad_db(target)  # loads on its own: ELEMENTs, FUNCTIONs and the magnetic type definition are there
    phase = db.phases["BCC_TEST"]
    assert tuple(float(s) for s in phase.sublattices) == (1.0, 3.0)
    assert [sorted(s.name for s in sub) for sub in phase.constituents] == [["FE"], ["C", "VA"]]
    assert phase.model_hints["ihj_magnetic_structure_factor"] == 0.4  # bcc, common practice (Dinsdale 1991)
    model = SublatticeModel.from_structure("BCC_TEST", "FE", "C", "bcc")
    mem = add_model("fe-c", model, dict(p.split("=", 1) for p in params)).db
    y = np.array([[1.0, 0.0, 1.0], [1.0, 0.01, 0.99], [1.0, 0.2, 0.8]])  # FE ; C, VA
    # same expressions through two writers and one reader: equal to float rounding (1e-9 relative)
    np.testing.assert_allclose(_energies(db, "BCC_TEST", y), _energies(mem, "BCC_TEST", y), rtol=1e-9)


def test_host_built_on_fe_c_equals_its_bcc_a2(tmp_path):
    # the bcc Fe host of a model built on the bundled fe-c (parameters copied from its BCC_A2, magnetic
    # included) has the same Gibbs energy as that database's BCC_A2, octahedral (c = 3) and tetrahedral (c = 6)
    ref = load_database("fe-c").db
    g_ref = _energies(ref, "BCC_A2", np.array([[1.0, 0.0, 1.0]]))
    for site in ("octahedral", "tetrahedral"):
        target = tmp_path / f"{site}.tdb"
        assert main(["model", "bcc", "--host", "FE", "--solute", "C", "--site", site, "--phase", "BCC_NEW",
                     "--from-phase", "BCC_A2", "--output", str(target)]) == 0
        g = _energies(_pycalphad_db(target), "BCC_NEW", np.array([[1.0, 0.0, 1.0]]))
        # the same expressions, but not the same floating-point sums: the reference is the database as read back
        # from the parse cache's pickle, the model file a fresh parse, and SymEngine orders the terms of a sum
        # differently in the two (measured: 8e-12 relative, 7e-8 J/mol on 1e4 J/mol). 1e-10 is rounding, while a
        # missing or wrong term (magnetic, a FUNCTION) moves G by far more than 1e-6.
        np.testing.assert_allclose(g, g_ref, rtol=1e-10)


def test_magnetic_parameters_need_a_known_lattice():
    from solubility.errors import InputError

    m = SublatticeModel.from_ratios("ALPHA", "FE", "C", a=1, c=3)
    with pytest.raises(InputError, match="magnetic constants"):
        m.tdb_block({"TC(ALPHA,FE:VA;0)": "1043"})


def test_missing_function_is_refused_not_zero(capsys):
    code = main(["model", "bcc", "--host", "FE", "--solute", "C", "--output", "/tmp/never-written.tdb",
                 "--parameter", "G(BCC_A2,FE:C;0)=GNOSUCH#+1"])
    assert code == 2
    assert "GNOSUCH" in capsys.readouterr().err


def test_add_model_result_is_accepted_by_solvus():
    # issue 11: what add_model returns is accepted wherever a database is
    from solubility.api import solvus

    model = SublatticeModel.from_structure("BCC_COPY", "FE", "C", "bcc")
    ext = add_model("fe-c", model, {"G(BCC_COPY,FE:VA;0)": "GA2FE#+1000", "G(BCC_COPY,FE:C;0)": "GA2FE#+1E6"})
    ds = solvus(ext, "BCC_A2", "C", [800.0], exclude=["GRAPHITE", "DIAMOND_A4", "BCC_COPY"])
    assert str(ds.status.values[0]) == "ok"


def test_site_ratio_conversion_keeps_the_dilute_solubility(tmp_path):
    # site-ratio conversion: BCC_A2 octahedral (c = 3) re-expressed tetrahedral (c = 6) keeps the solvus against
    # cementite at x < 1e-5 to 1e-9 relative (the construction matches mu_X to order x; the rest is O(x^2))
    from solubility.api import solvus

    target = tmp_path / "tet.tdb"
    assert main(["model", "bcc", "--host", "FE", "--solute", "C", "--site", "tetrahedral", "--base", "fe-c",
                 "--output", str(target)]) == 0
    assert load_database(target).sublattices("BCC_A2")[0] == (1.0, 6.0)
    ex = ["GRAPHITE", "DIAMOND_A4", "FCC_A1", "HCP_A3", "LIQUID", "M7C3_D101"]
    T = [450.0, 500.0, 550.0, 600.0]
    a = solvus("fe-c", "BCC_A2", "C", T, exclude=ex)
    b = solvus(str(target), "BCC_A2", "C", T, exclude=ex)
    xa, xb = a.X.values, b.X.values
    assert np.all(xa < 1e-5)
    np.testing.assert_allclose(xb, xa, rtol=1e-9)
