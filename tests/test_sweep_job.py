"""Job files and cases of `solubility.sweep`: parsing, normalization and validation before any work.

Nothing here computes a solvus. The checks are about the job language itself: TOML as the standard library
reads it (Python's tomllib, TOML 1.0), errors that name the case and the key, and the cartesian product form
(its size is the product of the lengths of the lists, common practice, no source).
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from solubility.errors import JobError
from solubility.sweeps import MAX_CASES, Case, job_sha256, parse_job, read_job
from solubility.sweeps.job import number_label

BASE = {"name": "a", "database": "fe-c", "phase": "BCC_A2", "solute": "C", "temperatures": "800:900:50"}


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "job.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_case_normalizes_its_inputs():
    case = Case(name=" a ", database="fe-c", phase="bcc_a2", solute="c", temperatures="800:900:50",
                exclude=["graphite", "DIAMOND_A4", "GRAPHITE"], fix={"cr": 0.02, "Mn": 0.01}, pressure=1e5)
    assert case.name == "a"
    assert (case.phase, case.solute) == ("BCC_A2", "C")
    assert case.temperatures == (800.0, 850.0, 900.0)  # STOP included (design.md)
    assert case.exclude == ("DIAMOND_A4", "GRAPHITE")  # sorted, without repeats
    assert case.fix == (("CR", 0.02), ("MN", 0.01))
    assert case.solvus_fix == case.fix_dict == {"CR": 0.02, "MN": 0.01}


def test_temperatures_are_rounded_to_a_microkelvin_so_grids_share_points():
    # 0.1 is not exact in binary: 300 + 2*0.1 and 300.2 differ in the last bit before rounding
    a = Case(**{**BASE, "temperatures": [300 + 2 * 0.1]})
    b = Case(**{**BASE, "temperatures": "300.2:300.2:1"})
    assert a.temperatures == b.temperatures == (300.2,)


def test_job_hash_depends_on_every_input_and_the_order():
    a, b = Case(**BASE), Case(**{**BASE, "name": "b"})
    assert job_sha256([a, b]) != job_sha256([b, a])
    assert job_sha256([a]) == job_sha256([Case(**BASE)])
    for key, value in [("pressure", 2e5), ("fix", {"CR": 0.01}), ("exclude", ["GRAPHITE"]),
                       ("temperatures", "800:900:25"), ("database", "other.tdb")]:
        assert job_sha256([Case(**{**BASE, key: value})]) != job_sha256([a]), key


@pytest.mark.parametrize(
    ("key", "value", "message"),
    [
        ("temperatures", "900:800:50", "STOP is below START"),
        ("temperatures", [800, 800], "repeat a value"),
        ("temperatures", [900, 800], "strictly increasing"),
        ("temperatures", [-5.0], "below absolute zero"),
        ("temperatures", "hot", "not a number"),
        ("temperatures", [True], "expected a list of numbers"),
        # the API's rule (solubility.calc.inputs.check_fix): u in (0, 1); the alloy without CR is fix = {}
        ("fix", {"CR": 1.2}, "outside (0, 1)"),
        ("fix", {"CR": 0}, "outside (0, 1)"),
        ("fix", {"CR": 0.6, "MN": 0.5}, "sum to 1.1"),
        ("fix", {"C": 0.01}, "solute cannot also be"),
        ("fix", "CR=0.02", "expected a table"),
        ("pressure", -1, "finite number of Pa > 0"),
        ("pressure", True, "expected a number, got a boolean"),
        ("pressure", math.inf, "finite number of Pa > 0"),
        ("exclude", "GRAPHITE", "expected a list of phase names"),
        ("exclude", ["BCC_A2"], "cannot be excluded"),
        ("solute", "Carbon", "not an element symbol"),
        ("phase", "BCC A2", "not a phase name"),
        ("database", 3, "expected a path"),
        ("name", "", "expected a name"),
    ],
)
def test_case_rejects_bad_values_naming_the_key(key, value, message):
    pattern = rf"^case( 'a')?: key '{key}(\.\w+)?': .*" + re.escape(message)
    with pytest.raises(JobError, match=pattern) as info:
        Case(**{**BASE, key: value})
    assert "\n" not in str(info.value)


def test_job_file_with_defaults_cases_and_product(tmp_path):
    path = _write(tmp_path, """
[defaults]
database = "fe-c"
solute = "C"
temperatures = "800:900:50"

[[case]]
name = "ferrite"
phase = "BCC_A2"

[[case]]
name = "austenite"
phase = "FCC_A1"
temperatures = [1200, 1250.5]
exclude = ["GRAPHITE"]

[[product]]
name = "{phase}-cr{fix.CR}-{index}"
pressure = 2e5
[product.vary]
phase = ["BCC_A2", "FCC_A1"]
fix.CR = [0.005, 0.01, 0.02]
""")
    cases = read_job(path)
    assert [c.name for c in cases] == [
        "ferrite", "austenite", "BCC_A2-cr0.005-1", "BCC_A2-cr0.01-2", "BCC_A2-cr0.02-3",
        "FCC_A1-cr0.005-4", "FCC_A1-cr0.01-5", "FCC_A1-cr0.02-6",
    ]
    assert cases[0].temperatures == (800.0, 850.0, 900.0)  # from [defaults]
    assert cases[1].temperatures == (1200.0, 1250.5)  # the case's own value replaces the default
    assert cases[1].exclude == ("GRAPHITE",)
    assert all(c.pressure == 2e5 for c in cases[2:]) and cases[0].pressure == 101325.0
    assert cases[4].fix == (("CR", 0.02),) and cases[4].phase == "BCC_A2"  # the first key varies slowest


def test_product_with_whole_fix_tables_and_temperature_alternatives(tmp_path):
    path = _write(tmp_path, """
[[product]]
name = "{fix}-{temperatures}"
database = "fe-c"
phase = "FCC_A1"
solute = "C"
[product.vary]
fix = [{}, {MN = 0.01, CR = 0.02}]
temperatures = ["1000:1100:50", [1200, 1300]]
""")
    cases = read_job(path)
    assert [c.name for c in cases] == ["none-1000:1100:50", "none-1200-1300", "MN0.01-CR0.02-1000:1100:50",
                                       "MN0.01-CR0.02-1200-1300"]
    assert cases[3].fix == (("CR", 0.02), ("MN", 0.01)) and cases[3].temperatures == (1200.0, 1300.0)


def test_relative_database_path_is_taken_from_the_job_folder(tmp_path, cfe_tdb_path):
    (tmp_path / "db").mkdir()
    (tmp_path / "db" / "fec.tdb").write_bytes(cfe_tdb_path.read_bytes())
    path = _write(tmp_path, """
[[case]]
name = "a"
database = "db/fec.tdb"
phase = "BCC_A2"
solute = "C"
temperatures = [900]
""")
    (case,) = read_job(path)
    assert Path(case.database) == (tmp_path / "db" / "fec.tdb").resolve()


# Every bad job file below is refused by read_job itself, before any database is opened or case run.
DEF = '[defaults]\ndatabase = "fe-c"\nphase = "BCC_A2"\nsolute = "C"\ntemperatures = [900]\n'
PROD = '[[product]]\ndatabase = "fe-c"\nsolute = "C"\ntemperatures = [900]\n'
BAD_JOBS = [
    ("missing key", '[[case]]\nname = "a"\ndatabase = "fe-c"\nphase = "BCC_A2"\ntemperatures = [900]\n',
     r"job.toml: case 1 \('a'\): key 'solute' is missing"),
    ("unknown key with suggestion", '[[case]]\nname = "a"\nphse = "BCC_A2"\n',
     r"case 1 \('a'\): key 'phse' is unknown; did you mean 'phase'\?"),
    ("wrong type", DEF + '[[case]]\nname = "a"\ntemperatures = 900\n',
     r"case 1 \('a'\): key 'temperatures': expected a 'START:STOP:STEP' string"),
    ("wrong type in a later case", DEF + '[[case]]\nname = "a"\n[[case]]\nname = "b"\npressure = "high"\n',
     r"case 2 \('b'\): key 'pressure': expected a number, got a string"),
    ("invalid TOML", '[[case]]\nname = "a\n', r"job.toml: invalid TOML: .*line 2"),
    ("duplicate names", DEF + '[[case]]\nname = "a"\n[[case]]\nname = "a"\n',
     r"case 2 \('a'\): key 'name': 'a' is already the name of case 1 \('a'\)$"),
    ("duplicate product names", PROD + 'name = "x"\n[product.vary]\nphase = ["BCC_A2", "FCC_A1"]\n',
     r"product 1, combination 2 \('x'\): key 'name'"),
    ("unknown top-level table", '[[cases]]\nname = "a"\n', r"key 'cases' is unknown; did you mean 'case'\?"),
    ("table instead of array", '[case]\nname = "a"\n',
     r"\[case\] must be an array of tables: write \[\[case\]\]"),
    ("name in defaults", '[defaults]\nname = "a"\n', r"\[defaults\]: key 'name' is unknown"),
    ("no cases", '[defaults]\nsolute = "C"\n', r"no cases"),
    ("product without vary", '[[product]]\nname = "x"\n', r"product 1: key 'vary' is missing"),
    ("vary not a list", PROD + 'name = "x"\n[product.vary]\nphase = "BCC_A2"\n',
     r"product 1: key 'vary.phase': expected a list of alternatives"),
    ("unknown placeholder", PROD + 'name = "{phsae}"\n[product.vary]\nphase = ["BCC_A2"]\n',
     r"placeholder \{phsae\} .*did you mean 'phase'"),
    ("bad value in a product",
     PROD + 'name = "{fix.CR}"\nphase = "BCC_A2"\n[product.vary]\nfix.CR = [0.01, 2]\n',
     r"product 1, combination 2 \('2'\): key 'fix.CR': fix CR=2 is outside \(0, 1\)"),
]


@pytest.mark.parametrize(("text", "message"), [b[1:] for b in BAD_JOBS], ids=[b[0] for b in BAD_JOBS])
def test_bad_job_files_name_the_case_and_key(tmp_path, text, message):
    with pytest.raises(JobError, match=message) as info:
        read_job(_write(tmp_path, text))
    assert "\n" not in str(info.value)


def test_missing_and_unreadable_job_files(tmp_path):
    with pytest.raises(JobError, match="does not exist"):
        read_job(tmp_path / "nope.toml")
    (tmp_path / "bin.toml").write_bytes(b"\xff\xfe\x00")
    with pytest.raises(JobError, match="cannot be read"):
        read_job(tmp_path / "bin.toml")


@settings(max_examples=30, deadline=None)
@given(
    phases=st.lists(st.sampled_from(["BCC_A2", "FCC_A1", "HCP_A3", "LIQUID"]), min_size=1, max_size=3,
                    unique=True),
    contents=st.lists(st.floats(0.001, 0.2, allow_nan=False), min_size=1, max_size=4, unique=True),
    pressures=st.lists(st.floats(1e3, 1e8, allow_nan=False), min_size=1, max_size=3, unique=True),
)
def test_product_size_is_the_product_of_the_list_lengths(phases, contents, pressures):
    job = {"product": [{"name": "c{index}", "database": "fe-c", "solute": "C", "temperatures": [900],
                        "vary": {"phase": phases, "fix": {"CR": contents}, "pressure": pressures}}]}
    cases = parse_job(job)
    assert len(cases) == len(phases) * len(contents) * len(pressures)
    combos = {(c.phase, c.fix_dict["CR"], c.pressure) for c in cases}
    assert len(combos) == len(cases)  # every combination once


@pytest.mark.parametrize(
    ("value", "text"),
    # issue 12: one compact form, no "+" (100000 and 1e+09 were both possible before)
    [(1e5, "1e5"), (100000, "1e5"), (1e9, "1e9"), (3e9, "3e9"), (2.5e9, "2.5e9"), (101325, "1.01325e5"),
     (1000, "1000"), (1200.5, "1200.5"), (0.02, "0.02"), (0.001, "0.001"), (1e-4, "1e-4"), (0, "0")],
)
def test_numbers_in_case_names_have_one_compact_form(value, text):
    assert number_label(value) == text
    assert float(text) == value  # reads back to the same number


def test_pressure_and_u_fraction_names_in_a_product():
    job = {"product": [{"name": "BCC_A2-{pressure}Pa-cr{fix.CR}", "database": "fe-c", "solute": "C",
                        "temperatures": [900], "phase": "BCC_A2",
                        "vary": {"pressure": [1e5, 100000.5, 1e9, 3e9], "fix": {"CR": [0.0001, 0.02]}}}]}
    names = [c.name for c in parse_job(job)]
    assert names[:4] == ["BCC_A2-1e5Pa-cr1e-4", "BCC_A2-1e5Pa-cr0.02", "BCC_A2-1.000005e5Pa-cr1e-4",
                         "BCC_A2-1.000005e5Pa-cr0.02"]
    assert names[-1] == "BCC_A2-3e9Pa-cr0.02" and not any("+" in n for n in names)


@pytest.mark.parametrize("lengths", [(100, 100, 100, 100), (100, 100, 100, 100, 100)], ids=["1e8", "1e10"])
def test_a_huge_product_is_refused_before_it_is_expanded(lengths):
    keys = ["pressure", "phase", "exclude", "temperatures", "database"]
    vary = {k: list(range(1, n + 1)) for k, n in zip(keys, lengths, strict=False)}
    job = {"product": [{"name": "c{index}", "database": "fe-c", "solute": "C", "temperatures": [900],
                        "phase": "BCC_A2", "vary": vary}]}
    with pytest.raises(JobError, match=rf"expands to {math.prod(lengths):,} cases; at most {MAX_CASES:,}"):
        parse_job(job)
