"""Site-ratio audit against pycalphad's shipped open databases.

Reference: the phase definitions FCC_A1 (M)1(C,VA)1, BCC_A2 (M)1(C,VA)3 and HCP_A3 (M)1(C,VA)0.5 are those of
the SGTE unary data (A.T. Dinsdale, Calphad 15 (1991) 317), used by the C-Fe assessment shipped with pycalphad
(cfe_broshe.tdb: Hallstedt et al., Calphad 34 (2010) 129). Site counts per host atom: octahedral 1 (fcc, hcp),
3 (bcc) (textbook crystallography, from memory).
"""

from __future__ import annotations

import pytest

from solubility.databases.audit import VERDICTS, audit_database, lattice_from_name
from solubility.databases.reader import load_database
from solubility.errors import DatabaseError, InputError

# (phase, site ratios, lattice, site kind, n, blocking, verdict), SGTE conventions (Dinsdale 1991)
_CFE_EXPECTED = [
    ("BCC_A2", (1.0, 3.0), "bcc", "octahedral", 3.0, 0.0, "consistent"),
    ("FCC_A1", (1.0, 1.0), "fcc", "octahedral", 1.0, 0.0, "consistent"),
    ("HCP_A3", (1.0, 0.5), "hcp", "octahedral", 1.0, 0.5, "consistent with blocking"),
]


@pytest.fixture(scope="module")
def cfe_rows(cfe_tdb_path):
    return audit_database(cfe_tdb_path)


def test_cfe_broshe_verdicts(cfe_rows):
    got = [
        (r.name, r.site_ratios, r.structure, r.site_kind, r.sites_per_host_atom, r.blocking, r.verdict)
        for r in cfe_rows
    ]
    # n and b from the site finder: exact counts, 1e-9 covers float noise
    assert [(*g[:4], g[6]) for g in got] == [(*e[:4], e[6]) for e in _CFE_EXPECTED]
    for g, e in zip(got, _CFE_EXPECTED, strict=True):
        assert g[4] == pytest.approx(e[4], rel=1e-9)
        assert g[5] == pytest.approx(e[5], abs=1e-9)
    assert all(r.constituents == (("FE",), ("C", "VA")) for r in cfe_rows)
    assert "blocking b = 0.5" in cfe_rows[2].note


def test_bundled_fe_c_gives_the_same_audit(cfe_rows):
    assert [r.to_dict() for r in audit_database("fe-c")] == [r.to_dict() for r in cfe_rows]


def test_json_form_has_design_keys(cfe_rows):
    keys = {
        "name",
        "site_ratios",
        "constituents",
        "structure",
        "site_kind",
        "sites_per_host_atom",
        "blocking",
        "consistent",
        "note",
    }
    for r in cfe_rows:
        d = r.to_dict()
        assert set(d) == keys and d["consistent"] in VERDICTS


def test_ordered_b2_sums_host_sublattices(pycalphad_db_dir):
    # alcfe_b2.tdb (B2 from Connetable et al., Calphad 32 (2008) 361): A2_BCC (AL,FE,VA)1(C,VA)3 and
    # B2_BCC (AL,FE,VA)0.5(AL,FE,VA)0.5(C,VA)3: the two host sublattices of B2 fill one bcc lattice, a = 1
    rows = {r.name: r for r in audit_database(pycalphad_db_dir / "alcfe_b2.tdb")}
    assert set(rows) == {"A2_BCC", "B2_BCC"}
    for r in rows.values():
        assert (r.structure, r.site_kind, r.verdict) == ("bcc", "octahedral", "consistent")
        assert (r.host_sites, r.interstitial_sites) == (1.0, 3.0)


def test_substitutional_vacancies_are_not_interstitial(pycalphad_db_dir):
    # alni_dupin_2001.tdb: BCC_A2 (AL,NI,VA)(VA), AL3NI2 (AL)(AL,NI)(NI,VA): VA there is a vacancy among
    # substitutional atoms (NI is on another sublattice too), or a sublattice holding only VA
    assert audit_database(pycalphad_db_dir / "alni_dupin_2001.tdb") == []


def test_user_mapping_and_unknown_lattice(tmp_path):
    text = (
        " ELEMENT VA VACUUM 0 0 0 !\n ELEMENT FE BCC_A2 55.847 4489 27.28 !\n"
        " ELEMENT N 1/2_MOLE_N2(G) 14.007 0 0 !\n"
        " TYPE_DEFINITION % SEQ * !\n"
        " PHASE EPS % 2 1 0.5 !\n CONSTITUENT EPS :FE:N,VA: !\n"
        " PHASE BCC_A2 % 2 1 5 !\n CONSTITUENT BCC_A2 :FE:N,VA: !\n"
    )
    p = tmp_path / "fen.tdb"
    p.write_text(text)
    rows = {r.name: r for r in audit_database(p)}
    assert rows["EPS"].verdict == "lattice unknown" and "--structure" in rows["EPS"].note
    # c/a = 5 lies between bcc's octahedral 3 and tetrahedral 6 per atom: tetrahedral with b = 1/6
    assert (rows["BCC_A2"].verdict, rows["BCC_A2"].site_kind) == ("consistent with blocking", "tetrahedral")
    assert rows["BCC_A2"].blocking == pytest.approx(1 / 6, rel=1e-9)
    mapped = {r.name: r for r in audit_database(p, structure_map={"eps": "HCP"})}
    assert (mapped["EPS"].structure, mapped["EPS"].verdict) == ("hcp", "consistent with blocking")
    with pytest.raises(InputError, match="not one of"):
        audit_database(p, structure_map={"EPS": "rhombohedral"})
    with pytest.raises(DatabaseError, match="did you mean"):
        audit_database(p, structure_map={"EPSS": "hcp"})


def test_no_geometric_match(tmp_path):
    text = (
        " ELEMENT VA VACUUM 0 0 0 !\n ELEMENT FE BCC_A2 55.847 4489 27.28 !\n"
        " ELEMENT C GRAPHITE 12.011 0 0 !\n"
        " TYPE_DEFINITION % SEQ * !\n PHASE FCC_A1 % 2 1 3 !\n CONSTITUENT FCC_A1 :FE:C,VA: !\n"
    )
    p = tmp_path / "odd.tdb"
    p.write_text(text)
    (row,) = audit_database(load_database(p))
    # fcc has 1 octahedral and 2 tetrahedral sites per atom: no family holds 3
    assert (row.verdict, row.site_kind, row.blocking) == ("no geometric match", None, None)


@pytest.mark.parametrize(
    ("name", "lattice"),
    [
        ("FCC_A1", "fcc"),
        ("FCC_A1#2", "fcc"),  # composition-set suffix
        ("A2_BCC", "bcc"),
        ("BCC_B2", "bcc"),
        ("HCP_A3#3", "hcp"),
        ("DIAMOND_A4", "diamond"),
        ("FCC_L12", "fcc"),
        ("CEMENTITE_D011", None),
        ("LIQUID", None),
        ("FCC_A2", None),  # conflicting tags
    ],
)
def test_lattice_from_name(name, lattice):
    assert lattice_from_name(name)[0] == lattice


@pytest.mark.parametrize(
    ("structure", "kind", "blocking"),
    [
        ("fcc", "octahedral", 0.0),
        ("fcc", "tetrahedral", 0.0),
        ("bcc", "octahedral", 0.0),
        ("bcc", "tetrahedral", 0.0),
        ("hcp", "octahedral", 0.5),  # HCP_A3 1:0.5 (Dinsdale 1991)
        ("diamond", "tetrahedral", 0.0),
    ],
)
def test_model_written_by_the_tool_audits_back(tmp_path, structure, kind, blocking):
    # round trip: model -> TDB text -> pycalphad -> audit recovers the site family and the blocking
    # (cases where no smaller family has a count in between, so the audit's answer is unique)
    from solubility.models.sublattice import SublatticeModel

    m = SublatticeModel.from_structure(None, "FE", "C", structure, kind, blocking=blocking)
    els = {"FE": ("BCC_A2", 55.847, 4489.0, 27.28), "C": ("GRAPHITE", 12.011, 1054.0, 5.74)}  # cfe_broshe.tdb
    p = tmp_path / "m.tdb"
    p.write_text(m.tdb_block(elements=els))
    (row,) = audit_database(p)
    assert (row.structure, row.site_kind) == (structure, kind)
    assert row.blocking == pytest.approx(blocking, abs=1e-9)
    assert row.verdict == ("consistent" if blocking == 0 else "consistent with blocking")
