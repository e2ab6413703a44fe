"""The bundled `steel` database: provenance, licence, content.

External references: the record in solubility/databases/README.md (source repository, sha256 values); the MIT
licence text (opensource.org/license/mit, the wording in the source file's header); the stoichiometries of
the steel carbides and nitrides (cementite Fe3C, M23C6, M7C3, gamma-prime Fe4N, AlN: common practice, no
source, any metallurgy handbook); the source's own reference list.
"""

from __future__ import annotations

import codecs
import hashlib
import re
from pathlib import Path

import pytest

from solubility.databases.reader import bundled_databases
from solubility.databases.reduce import tdb_parameter_references, tdb_references, undefined_functions

DB_DIR = Path(__file__).resolve().parents[1] / "solubility" / "databases"
STEEL = DB_DIR / "steel.tdb"
ORIGINAL_SHA = "2869da3e4a540f2867dc381f10f7b4053af6c14c30c65cfa4b95c513bbfe1356"  # mfrichtl/librecalphad
SHARED_SHA = "0d18f9be4db953e2a1cb7193ab8a1b6f17742ab83f2b220145bb28fd15488504"
ELEMENTS = {"FE", "C", "N", "CR", "MN", "MO", "NB", "TI", "V", "SI", "AL", "NI"}


@pytest.fixture(scope="module")
def text() -> str:
    return STEEL.read_text(encoding="utf-8")


def _entry() -> dict:
    return next(e for e in bundled_databases() if e["name"] == "steel")


def test_provenance_recorded_in_index_and_readme():
    entry = _entry()
    sha = hashlib.sha256(STEEL.read_bytes()).hexdigest()
    readme = (DB_DIR / "README.md").read_text(encoding="utf-8")
    assert entry["sha256"] == sha and f"| steel | steel.tdb | {sha} |" in readme
    assert entry["original_sha256"] == ORIGINAL_SHA and entry["shared_sha256"] == SHARED_SHA
    section = readme.split("## steel", 1)[1].split("\n## ", 1)[0]
    for needed in (ORIGINAL_SHA, SHARED_SHA, sha, "mfrichtl/librecalphad", "libreCalphad/databases/mf-steel.tdb",
                   "L(M7C3_D101,FE,MO:C;0)", "L(M7C3_D101,CR,FE,MO:C;0)", "MC_SHP", "GAS", "Permission is hereby"):
        assert needed in section, needed


def test_licence_and_copyright_kept_in_header(text):
    header = text.split("\nELEMENT", 1)[0]
    assert "$ Copyright (c) 2024 Matthew Frichtl" in header
    body = " ".join(ln.lstrip("$").strip() for ln in header.splitlines())
    # the MIT licence's two operative sentences, word for word
    for sentence in (
        "Permission is hereby granted, free of charge, to any person obtaining a copy of this software and "
        "associated documentation files (the \"Software\"), to deal in the Software without restriction,",
        "The above copyright notice and this permission notice shall be included in all copies or substantial "
        "portions of the Software.",
        "THE SOFTWARE IS PROVIDED \"AS IS\", WITHOUT WARRANTY OF ANY KIND,",
    ):
        assert sentence in " ".join(body.split()), sentence
    assert "ORDERED FCC PHASES INCORPORATED" in header  # the source's notes are kept


def test_every_reference_code_is_resolved(text):
    codes = set(tdb_parameter_references(text).values())
    listed = tdb_references(text)
    # the list keeps exactly the entries the kept parameters use; the codes the source's own list lacks are
    # named in the README
    readme = (DB_DIR / "README.md").read_text(encoding="utf-8").split("## steel", 1)[1]
    lacking = set(re.findall(r"`(\d\d[A-Z]+)`", readme.split("have no entry in the source's list", 1)[1][:400]))
    assert len(codes) > 100 and set(listed) == codes - lacking
    # Gustafson's Fe-C assessment (Scand. J. Metall. 14 (1985) 259) is cited by the ferrite Fe:C end-member
    assert tdb_parameter_references(text)["G(BCC_A2,FE:C;0)"] == "85GUS"
    assert "Scand. J. Metall. 14.5 (1985): 259-267" in listed["85GUS"]


def test_no_commercial_program_names(text):
    # the names of well-known commercial thermodynamic programs and databases (common knowledge), kept ROT13-
    # encoded so that the project's own files name no product
    names = [codecs.decode(n, "rot13") for n in (
        "gurezb-pnyp", "gurezbpnyp", "snpgfntr", "cnaqng", "wzngceb", "zgqngn", "purzfntr", "pbzchgurez", "qvpgen",
        "gpsr", "gpav", "gpurn", "zbosr", "zngpnyp", "cneebg", "ffby5", "ffho",
    )]
    low = text.lower()
    assert [n for n in names if n in low] == []


def test_elements_and_key_phases(steel_db):
    assert set(steel_db.elements) - {"VA", "/-"} == ELEMENTS
    phases = set(steel_db.phases)
    # ferrite, austenite (and the ordered phases they are the disordered parts of), carbides, nitrides
    for name in ("BCC_A2", "FCC_A1", "BCC_B2", "FCC_L12", "HCP_A3", "CEMENTITE_D011", "M23C6_D84", "M7C3_D101",
                 "M6C_E93", "FE4N_LP10", "ALN_B4", "GRAPHITE_A9", "LIQUID", "GAS", "SIGMA_D8B", "MC_SHP"):
        assert name in phases, name
    assert steel_db.db.phases["BCC_B2"].model_hints["disordered_phase"] == "BCC_A2"
    assert steel_db.db.phases["FCC_L12"].model_hints["disordered_phase"] == "FCC_A1"


@pytest.mark.parametrize(
    ("phase", "ratio", "metals", "interstitials"),
    [
        ("CEMENTITE_D011", (3.0, 1.0), {"FE", "CR", "MN"}, {"C"}),  # Fe3C
        ("M23C6_D84", (20.0, 3.0, 6.0), {"CR", "FE"}, {"C"}),  # (Cr,Fe)23C6: 20 + 3 metal sites, 6 C
        ("M7C3_D101", (7.0, 3.0), {"CR", "FE"}, {"C"}),  # (Cr,Fe)7C3
        ("FE4N_LP10", (4.0, 1.0), {"FE"}, {"N"}),  # gamma-prime Fe4N
        ("ALN_B4", (1.0, 1.0), {"AL"}, {"N"}),  # AlN
        ("FCC_A1", (1.0, 1.0), {"FE", "NB", "TI", "V"}, {"C", "N", "VA"}),  # austenite and NaCl-type MX
        ("BCC_A2", (1.0, 3.0), {"FE", "CR"}, {"C", "N", "VA"}),  # ferrite, octahedral sites 3 per atom
    ],
)
def test_carbide_and_nitride_stoichiometry(steel_db, phase, ratio, metals, interstitials):
    ratios, species = steel_db.sublattices(phase)
    assert ratios == ratio
    assert metals <= set().union(*species[:-1])
    assert interstitials <= set(species[-1])


def test_misspelt_functions_are_the_ones_listed_in_readme(steel_db):
    found = set(undefined_functions(steel_db.db))
    readme = (DB_DIR / "README.md").read_text(encoding="utf-8").split("## steel", 1)[1].split("\n## ", 1)[0]
    para = readme.split("FUNCTIONs referenced under misspelt names", 1)[1].split("The full file has also", 1)[0]
    listed = set(re.findall(r"`([A-Z0-9]+)`(?: \(| in)", para))
    assert found == listed
