"""Host structures: built-in cells, the structure file format and validation (one-line StructureErrors)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from solubility.errors import StructureError
from solubility.geometry.structure import (
    BUILTIN_NAMES,
    IDEAL_C_OVER_A,
    Structure,
    builtin_structure,
    load_structure,
    read_structure,
)

EXAMPLES = Path(__file__).resolve().parent.parent / "examples" / "structures"

# Nearest-neighbour distance / a of the cubic cells, and atoms per conventional cell: standard crystallography
# (fcc a/sqrt2, bcc a sqrt3/2, sc a, diamond a sqrt3/4; 4, 2, 1, 8 atoms), common practice, no source.
# Tolerance 1e-12: only floating-point rounding separates the computed from the exact value.
CUBIC = [
    pytest.param("fcc", 1 / math.sqrt(2), 4, id="fcc-a/sqrt2-4atoms"),
    pytest.param("bcc", math.sqrt(3) / 2, 2, id="bcc-a*sqrt3/2-2atoms"),
    pytest.param("sc", 1.0, 1, id="sc-a-1atom"),
    pytest.param("diamond", math.sqrt(3) / 4, 8, id="diamond-a*sqrt3/4-8atoms"),
]


@pytest.mark.parametrize(("name", "dnn_over_a", "atoms"), CUBIC)
def test_cubic_builtins(name: str, dnn_over_a: float, atoms: int) -> None:
    s = builtin_structure(name, lattice_parameter=3.0)
    assert s.atoms_per_cell == atoms
    assert s.nearest_neighbour_distance == pytest.approx(3.0 * dnn_over_a, abs=1e-12)
    assert s.host_radius == pytest.approx(1.5 * dnn_over_a, abs=1e-12)
    assert s.absolute_scale


@pytest.mark.parametrize("c_over_a", [1.587, IDEAL_C_OVER_A, 1.886, 1.0])
def test_hcp_nearest_neighbours(c_over_a: float) -> None:
    # hcp: in-plane neighbours at a, out-of-plane at sqrt(a^2/3 + c^2/4) (standard hcp geometry, no source)
    s = builtin_structure("hcp", c_over_a=c_over_a, lattice_parameter=2.95)
    a, c = 2.95, 2.95 * c_over_a
    assert s.nearest_neighbour_distance == pytest.approx(min(a, math.sqrt(a * a / 3 + c * c / 4)), abs=1e-12)
    assert s.lattice[2, 2] == pytest.approx(c, abs=1e-12)


def test_scale_from_host_radius_and_relative_scale() -> None:
    s = builtin_structure("bcc", host_radius=1.24)  # spheres in contact: a = 4R/sqrt(3)
    assert s.lattice[0, 0] == pytest.approx(4 * 1.24 / math.sqrt(3), abs=1e-12)
    assert s.host_radius == pytest.approx(1.24, abs=1e-15)
    unscaled = builtin_structure("fcc")
    assert not unscaled.absolute_scale
    both = builtin_structure("fcc", lattice_parameter=3.6, host_radius=1.2)  # R given, not d_nn/2
    assert both.host_radius == 1.2 and both.nearest_neighbour_distance == pytest.approx(3.6 / math.sqrt(2))


def test_load_structure_builtin_and_file() -> None:
    assert load_structure("BCC").name == "bcc"
    s = load_structure(str(EXAMPLES / "b2.toml"))
    assert s.name == "B2" and s.species == ("A", "B") and s.atoms_per_cell == 2
    assert load_structure(EXAMPLES / "b2.toml", host_radius=1.3).host_radius == 1.3


def test_cell_lengths_and_angles(tmp_path: Path) -> None:
    s = read_structure(EXAMPLES / "omega.toml")
    assert s.atoms_per_cell == 3
    # hexagonal cell volume a^2 c sqrt(3)/2 (standard formula)
    assert s.volume == pytest.approx(4.60**2 * 2.82 * math.sqrt(3) / 2, rel=1e-12)


def test_arrays_are_read_only() -> None:
    s = builtin_structure("fcc")
    with pytest.raises(ValueError, match="read-only"):
        s.lattice[0, 0] = 2.0


def _one_line(exc: pytest.ExceptionInfo) -> str:
    text = str(exc.value)
    assert "\n" not in text and text
    return text


BAD_STRUCTURES = [
    pytest.param(np.zeros((3, 3)), [[0, 0, 0]], "singular", id="zero-lattice"),
    pytest.param([[1, 0, 0], [2, 0, 0], [0, 0, 1]], [[0, 0, 0]], "singular", id="coplanar-vectors"),
    pytest.param(np.eye(3), [[0, 0, 0], [0.001, 0, 0]], "overlap", id="overlapping-atoms"),
    pytest.param(np.eye(3), [[0, 0, 0], [0.999, 0, 0]], "overlap", id="overlap-across-cell-face"),
    pytest.param(np.eye(3), [], "empty", id="empty-basis"),
    pytest.param(np.eye(3), [["a", 0, 0]], "not a number", id="non-number"),
    pytest.param(np.eye(3), [[True, 0, 0]], "not a number", id="boolean"),
    pytest.param([[math.nan, 0, 0], [0, 1, 0], [0, 0, 1]], [[0, 0, 0]], "NaN", id="nan-lattice"),
    pytest.param(np.eye(3), [[0, math.inf, 0]], "NaN or infinity", id="inf-basis"),
    pytest.param(np.eye(2), [[0, 0, 0]], "shape", id="2d-lattice"),
    pytest.param(np.eye(3), [[0, 0]], "shape", id="2d-position"),
]


@pytest.mark.parametrize(("lattice", "basis", "words"), BAD_STRUCTURES)
def test_invalid_structures(lattice, basis, words: str) -> None:
    with pytest.raises(StructureError) as exc:
        Structure("x", lattice, basis)
    assert words in _one_line(exc)


BAD_BUILTINS = [
    pytest.param("hcp", {"c_over_a": 0.0}, "c/a", id="c/a-zero"),
    pytest.param("hcp", {"c_over_a": -1.6}, "c/a", id="c/a-negative"),
    pytest.param("hcp", {"c_over_a": math.nan}, "c/a", id="c/a-nan"),
    pytest.param("fcc", {"c_over_a": 1.6}, "hcp only", id="c/a-for-fcc"),
    pytest.param("bcc", {"lattice_parameter": -2.87}, "lattice parameter", id="negative-a"),
    pytest.param("bcc", {"lattice_parameter": math.nan}, "lattice parameter", id="nan-a"),
    pytest.param("bcc", {"lattice_parameter": "2.87"}, "lattice parameter", id="string-a"),
    pytest.param("bcc", {"host_radius": 0.0}, "host radius", id="zero-R"),
    pytest.param("bcp", {}, "unknown built-in", id="unknown-name"),
]


@pytest.mark.parametrize(("name", "kwargs", "words"), BAD_BUILTINS)
def test_invalid_builtins(name: str, kwargs: dict, words: str) -> None:
    with pytest.raises(StructureError) as exc:
        builtin_structure(name, **kwargs)
    assert words in _one_line(exc)


GOOD_FILE = """
lattice = [[3, 0, 0], [0, 3, 0], [0, 0, 3]]
atoms = [{species = "Fe", position = [0, 0, 0]}, {position = [0.5, 0.5, 0.5]}]
"""

BAD_FILES = [
    pytest.param(
        "lattice = [[3, 0, 0], [0, 3, 0]]\natoms = [{position = [0, 0, 0]}]", "shape", id="two-vectors"
    ),
    pytest.param(GOOD_FILE + "colour = 'red'\n", "unknown key", id="unknown-key"),
    pytest.param(GOOD_FILE.replace("[0.5, 0.5, 0.5]", "['x', 0.5, 0.5]"), "not a number", id="non-number"),
    pytest.param(GOOD_FILE.replace("[0.5, 0.5, 0.5]", "[0, 0, 0]"), "overlap", id="overlap"),
    pytest.param("lattice = [[3, 0, 0], [0, 3, 0], [0, 0, 3]]\natoms = []\n", "non-empty", id="no-atoms"),
    pytest.param("lattice = [[3, 0, 0], [0, 3, 0], [0, 0, 3]]\n", "non-empty", id="missing-atoms"),
    pytest.param("atoms = [{position = [0, 0, 0]}]\n", "exactly one of", id="no-lattice"),
    pytest.param(GOOD_FILE + "host_radius = -1\n", "host radius", id="negative-R"),
    pytest.param(GOOD_FILE + "host_radius = nan\n", "host radius", id="nan-R"),
    pytest.param("lattice = [[3, 0, 0]\n", "not valid TOML", id="bad-toml"),
    pytest.param(
        "cell = {a = 3, b = 3, c = 3, alpha = 90, beta = 90, gamma = 200}\n"
        "atoms = [{position = [0, 0, 0]}]\n",
        "impossible",
        id="impossible-angles",
    ),
    pytest.param(
        "cell = {a = 3, b = 3, c = 3, alpha = 90, beta = 90}\natoms = [{position = [0, 0, 0]}]\n",
        "exactly the keys",
        id="cell-missing-gamma",
    ),
]


@pytest.mark.parametrize(("text", "words"), BAD_FILES)
def test_invalid_structure_files(tmp_path: Path, text: str, words: str) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(StructureError) as exc:
        read_structure(path)
    message = _one_line(exc)
    assert words in message and "bad.toml" in message


def test_good_file_defaults(tmp_path: Path) -> None:
    path = tmp_path / "my_host.toml"
    path.write_text(GOOD_FILE, encoding="utf-8")
    s = read_structure(path)
    assert s.name == "my_host" and s.species == ("Fe", "M")
    assert s.nearest_neighbour_distance == pytest.approx(3 * math.sqrt(3) / 2, abs=1e-12)


def test_load_structure_errors(tmp_path: Path) -> None:
    with pytest.raises(StructureError) as exc:
        load_structure(str(tmp_path / "missing.toml"))
    assert "neither a built-in" in _one_line(exc)
    with pytest.raises(StructureError) as exc:
        load_structure(EXAMPLES / "b2.toml", lattice_parameter=3.0)
    assert "built-ins only" in _one_line(exc)


def test_builtin_names() -> None:
    assert BUILTIN_NAMES == ("fcc", "bcc", "hcp", "sc", "diamond")
