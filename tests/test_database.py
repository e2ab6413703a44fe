"""Loading databases: bundled list and provenance, clear errors, cache, VA handling, model round trips.

External references: pycalphad's shipped open databases (the installed package) and pycalphad's own
`calculate`; the bundled file's record in solubility/databases/README.md.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from solubility.databases.bundled import bundled_databases
from solubility.databases.extend import add_model
from solubility.databases.reader import (
    LoadedDatabase,
    check_elements,
    check_phases,
    check_species,
    components_for,
    element_data,
    load_database,
)
from solubility.errors import DatabaseError, DatabaseNotFoundError
from solubility.models.closed_forms import GAS_CONSTANT
from solubility.models.sublattice import SublatticeModel

DB_DIR = Path(__file__).resolve().parents[1] / "solubility" / "databases"


@pytest.fixture(scope="module")
def fec() -> LoadedDatabase:
    return load_database("fe-c")


# ---- bundled files and their record ------------------------------------------------------------------
def _readme_table() -> dict[str, str]:
    text = (DB_DIR / "README.md").read_text(encoding="utf-8")
    rows = re.findall(r"^\| ([\w.-]+) \| ([\w.-]+\.tdb) \| ([0-9a-f]{64}) \|$", text, flags=re.M)
    return {file: sha for _name, file, sha in rows}


def test_readme_lists_every_bundled_file_with_its_sha256():
    listed = _readme_table()
    on_disk = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in DB_DIR.glob("*.tdb")}
    assert listed == on_disk


def test_index_matches_files_and_readme():
    listed = _readme_table()
    for entry in bundled_databases():
        path = DB_DIR / entry["file"]
        assert hashlib.sha256(path.read_bytes()).hexdigest() == entry["sha256"] == listed[entry["file"]]
        for key in ("name", "description", "citation", "licence", "source"):
            assert entry[key].strip()
    assert json.loads((DB_DIR / "index.json").read_text())[0]["name"] == "fe-c"


def test_bundled_fe_c_is_pycalphads_file_less_one_comment_line(cfe_tdb_path):
    # README: the original's sha256 is recorded and exactly one '$' comment line was removed
    original = cfe_tdb_path.read_bytes()
    entry = next(e for e in bundled_databases() if e["name"] == "fe-c")
    assert hashlib.sha256(original).hexdigest() == entry["original_sha256"]
    bundled = (DB_DIR / entry["file"]).read_bytes()
    orig_lines, new_lines = original.split(b"\n"), bundled.split(b"\n")
    assert len(orig_lines) == len(new_lines) + 1
    removed = [i for i in range(len(new_lines)) if orig_lines[i] != new_lines[i]][:1] or [len(new_lines)]
    i = removed[0]
    assert orig_lines[i].startswith(b"$")
    assert orig_lines[:i] + orig_lines[i + 1 :] == new_lines
    # the citations of the header are kept (Hallstedt 2010, Brosh 2007, Dinsdale 1991)
    for cite in (b"Calphad, 34, 129", b"CALPHAD 31 (2007) 173", b"Calphad, 15, 317"):
        assert cite in bundled


# ---- loading ------------------------------------------------------------------------------------------
def test_load_bundled_and_provenance(fec):
    assert fec.elements == ("/-", "C", "FE", "VA")
    assert {"BCC_A2", "FCC_A1", "HCP_A3", "CEMENTITE_D011", "GRAPHITE", "LIQUID"} <= set(fec.phases)
    assert fec.sha256 == next(e["sha256"] for e in bundled_databases() if e["name"] == "fe-c")
    prov = fec.provenance()
    # HCP_A3 (FE)1(C,VA)0.5, as written in the file (cfe_broshe.tdb, PHASE HCP_A3 %) 2 1 .5)
    assert prov["phases"]["HCP_A3"] == {"site_ratios": [1.0, 0.5], "constituents": [["FE"], ["C", "VA"]]}
    json.dumps(prov)


def test_cache_returns_same_object_for_same_bytes(tmp_path, cfe_tdb_path):
    a = load_database(cfe_tdb_path)
    assert load_database(str(cfe_tdb_path)) is a
    copy = tmp_path / "copy.tdb"
    copy.write_bytes(cfe_tdb_path.read_bytes())
    b = load_database(copy)
    assert b is not a and b.sha256 == a.sha256  # other path: own entry
    copy.write_bytes(cfe_tdb_path.read_bytes() + b"\n$ changed\n")
    assert load_database(copy).sha256 != a.sha256  # changed bytes: parsed again


def test_wraps_a_pycalphad_database(fec):
    w = load_database(fec.db)
    assert w.path is None and w.sha256 is None and w.phases == fec.phases


def _write(tmp_path: Path, name: str, data: bytes | str) -> Path:
    p = tmp_path / name
    p.write_bytes(data if isinstance(data, bytes) else data.encode())
    return p


_GOOD = " ELEMENT FE BCC_A2 55.847 4489 27.28 !\n ELEMENT VA VACUUM 0 0 0 !\n"


@pytest.mark.parametrize(
    ("content", "error", "match"),
    [
        (b"", DatabaseError, "is empty"),
        (b"  \n\n  ", DatabaseError, "is empty"),
        (b"\x00\x01\x02ELF" * 10, DatabaseError, "binary"),
        (bytes(range(1, 32)) * 20, DatabaseError, "binary"),
        (
            _GOOD
            + " PHASE BCC % 1 1 !\n CONSTITUENT BCC :FE: !\n PARAMETER G(BCC,FE;0) 298.15 +1**; 6000 N !\n",
            DatabaseError,
            r"line 5",
        ),
        ("\n\n THIS IS NOT A TDB FILE !\n", DatabaseError, r"line 3: invalid TDB syntax"),
        (_GOOD, DatabaseError, "defines no phases"),
        (_GOOD + " PHASE BCC % 2 1 3 !\n", DatabaseError, "no complete CONSTITUENT"),
        (_GOOD + " PHASE BCC % 1 1 !\n CONSTITUENT BCC :FE,CR: !\n", DatabaseError, "line 4: cannot be read"),
    ],
    ids=[
        "empty",
        "blank",
        "nul-bytes",
        "control-chars",
        "bad-expression-line",
        "garbage-line",
        "no-phases",
        "no-constituents",
        "undeclared-species-line",
    ],
)
def test_bad_files_raise_own_error_naming_file(tmp_path, content, error, match):
    p = _write(tmp_path, "bad.tdb", content)
    with pytest.raises(error, match=match) as info:
        load_database(p)
    assert "bad.tdb" in str(info.value)
    assert "\n" not in str(info.value)  # one line (the CLI prints it as is)


def test_missing_file_folder_and_size(tmp_path):
    with pytest.raises(DatabaseNotFoundError, match=r"nothere\.tdb"):
        load_database(tmp_path / "nothere.tdb")
    with pytest.raises(DatabaseNotFoundError, match="did you mean fe-c"):
        load_database("fe-cc")
    with pytest.raises(FileNotFoundError):  # DatabaseNotFoundError subclasses the builtin
        load_database("")
    with pytest.raises(DatabaseError, match="folder"):
        load_database(tmp_path)
    fifo = tmp_path / "pipe.tdb"
    os.mkfifo(fifo)  # reading a FIFO would block until a writer comes
    with pytest.raises(DatabaseError, match="not a regular file"):
        load_database(fifo)
    p = _write(tmp_path, "big.tdb", _GOOD * 100)
    with pytest.raises(DatabaseError, match="at most 100 are read"):
        load_database(p, max_bytes=100)


def test_check_names(fec):
    assert check_phases(fec, ["bcc_a2", "FCC_A1"]) == ("BCC_A2", "FCC_A1")
    with pytest.raises(DatabaseError, match="did you mean BCC_A2"):
        check_phases(fec, ["BCC_A3"])
    assert check_elements(fec, ["fe", "C"]) == ("FE", "C")
    with pytest.raises(DatabaseError, match="element 'CR' is not in database 'fe-c'"):
        check_elements(fec, ["CR"])
    assert check_species(fec, ["VA"]) == ("VA",)
    with pytest.raises(DatabaseError, match="species"):
        check_species(fec, ["CO2"])


def test_components_include_va_when_any_phase_has_it(fec, pycalphad_db_dir):
    # design.md: without VA pycalphad silently drops phases with an interstitial sublattice
    assert components_for(fec, ["FE", "C"]) == ["C", "FE", "VA"]
    femn = load_database(pycalphad_db_dir / "femn.tdb")
    assert "VA" in components_for(femn, ["FE", "MN"])


def test_element_data_from_element_lines(fec):
    # cfe_broshe.tdb: ELEMENT FE BCC_A2 5.5847E+01 4.4890E+03 2.7280E+01
    assert element_data(fec, ["FE"]) == {"FE": ("BCC_A2", 55.847, 4489.0, 27.28)}


# ---- round trip: model -> TDB text -> pycalphad -> same ratios, constituents and energies ----------
_PARAMS = {
    "G(BCC_TEST,FE:VA;0)": "1000-20*T+2*T*LN(T)",
    "G(BCC_TEST,FE:C;0)": "80000+15*T",
    "G(BCC_TEST,FE:C,VA;0)": "-5000+T",
}


def _g_formula(y: np.ndarray, T: float, c: float) -> np.ndarray:
    """G per mole of atoms of (FE)1(C,VA)c with the parameters above (Redlich-Kister order 0)."""
    g_va = 1000 - 20 * T + 2 * T * np.log(T)
    g_c = 80000 + 15 * T
    L0 = -5000 + T
    xlogx = np.where(y > 0, y * np.log(np.where(y > 0, y, 1)), 0) + np.where(
        y < 1, (1 - y) * np.log(np.where(y < 1, 1 - y, 1)), 0
    )
    g_fu = y * g_c + (1 - y) * g_va + c * GAS_CONSTANT * T * xlogx + y * (1 - y) * L0
    return g_fu / (1 + c * y)


def _calc_gm(db, phase: str, y: np.ndarray, T: float) -> np.ndarray:
    from pycalphad import calculate

    pts = np.column_stack([np.ones_like(y), y, 1 - y])  # (FE; C, VA), species sorted
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calculate(db, ["FE", "C", "VA"], phase, T=T, P=101325, N=1, points=pts)
    return res.GM.values.squeeze()


@pytest.mark.parametrize("structure", ["bcc", "fcc", "hcp"])
def test_round_trip_text_to_pycalphad(tmp_path, fec, structure):
    m = SublatticeModel.from_structure(
        "BCC_TEST", "FE", "C", structure, blocking=0.5 if structure == "hcp" else 0
    )
    text = m.tdb_block(_PARAMS, elements=element_data(fec, ["FE", "C"]))
    ldb = load_database(_write(tmp_path, "model.tdb", text))
    ratios, species = ldb.sublattices("BCC_TEST")
    assert ratios == (m.a, m.c)
    assert species == (("FE",), ("C", "VA"))
    y = np.array([0.0, 1e-6, 0.01, 0.3, 0.5, 0.9, 1.0])
    for T in (400.0, 1000.0, 1800.0):
        # pycalphad evaluates the same expressions in double precision: 1e-10 relative
        assert np.allclose(_calc_gm(ldb.db, "BCC_TEST", y, T), _g_formula(y, T, m.c), rtol=1e-10, atol=1e-8)


def test_add_model_to_loaded_database(fec):
    m = SublatticeModel.from_structure("BCC_TEST", "FE", "C", "bcc")
    ext = add_model(fec, m, _PARAMS)
    assert "BCC_TEST" in ext.phases and "BCC_TEST" not in fec.db.phases  # the cached original is untouched
    assert ext.sublattices("BCC_TEST") == ((1.0, 3.0), (("FE",), ("C", "VA")))
    assert ext.sublattices("FCC_A1") == fec.sublattices("FCC_A1")
    y = np.array([0.0, 0.05, 0.5, 1.0])
    assert np.allclose(_calc_gm(ext.db, "BCC_TEST", y, 1100.0), _g_formula(y, 1100.0, 3.0), rtol=1e-10)
    with pytest.raises(DatabaseError, match="exists already"):
        add_model(ext, m)


def test_add_model_with_database_functions(fec):
    # a parameter may use the database's FUNCTIONs; compare with the same function in GRAPHITE's own energy:
    # cfe_broshe.tdb defines GA9C (graphite, from the SGTE data via 10Hal) and uses it in G(GRAPHITE,C;0)
    m = SublatticeModel.from_structure("FCC_TEST", "FE", "C", "fcc")
    ext = add_model(fec, m, {"G(FCC_TEST,FE:VA;0)": "0", "G(FCC_TEST,FE:C;0)": "+GA9C#"})
    g = _calc_gm(ext.db, "FCC_TEST", np.array([1.0]), 1000.0)
    # G of FE:C per mole of atoms = GA9C(T) / 2 (one FE and one C per formula unit; G(FE:VA) = 0)
    ga9c = _eval_function(fec.db, "GA9C", 1000.0)
    assert float(g) == pytest.approx(ga9c / 2, rel=1e-10)


def _eval_function(db, name: str, T: float) -> float:
    from pycalphad import variables as v

    expr = db.symbols[name]
    for _ in range(20):  # resolve nested FUNCTION references
        expr = expr.xreplace({s: db.symbols[s.name] for s in expr.free_symbols if s.name in db.symbols})
    return float(expr.subs({v.T: T, v.P: 101325}))
