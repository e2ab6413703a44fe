"""Interstitial site families against textbook closed forms, properties over random lattices, and misfit.

Closed forms (hard spheres in contact) are the values in standard physical-metallurgy texts (for example the
tables of interstitial hole sizes in D. A. Porter and K. E. Easterling, Phase Transformations in Metals
and Alloys, and in R. E. Smallman's Physical Metallurgy; cited from memory): common practice. Counts per host
atom are the textbook ones too. Tolerance 1e-9 everywhere for closed forms: the only error is floating-point
rounding in the circumcentre solutions (about 1e-13), so 1e-9 leaves room without hiding a wrong formula.
"""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from solubility.errors import InputError, StructureError
from solubility.geometry.critical import DIST_TOL
from solubility.geometry.sites import SIZE_RULE_LIMIT, SiteFamily, find_sites, misfit
from solubility.geometry.structure import Structure, builtin_structure

TOL = 1e-9


def _by_kind(families: tuple[SiteFamily, ...]) -> dict[str, SiteFamily]:
    out = {f.kind: f for f in families}
    assert len(out) == len(families), "two families of one kind where one was expected"
    return out


# (structure, kind, r/R, per host atom, coordination, critical point)
CLOSED_FORMS = [
    pytest.param(
        "fcc", "octahedral", math.sqrt(2) - 1, 1, 6, "maximum", id="fcc-oct-sqrt2-1-1perAtom-textbook"
    ),
    pytest.param(
        "fcc", "tetrahedral", math.sqrt(1.5) - 1, 2, 4, "maximum", id="fcc-tet-sqrt1.5-1-2-textbook"
    ),
    pytest.param(
        "bcc", "octahedral", 2 / math.sqrt(3) - 1, 3, 6, "saddle", id="bcc-oct-2/sqrt3-1-3-textbook"
    ),
    pytest.param(
        "bcc", "tetrahedral", math.sqrt(5 / 3) - 1, 6, 4, "maximum", id="bcc-tet-sqrt5/3-1-6-textbook"
    ),
    pytest.param("hcp", "octahedral", math.sqrt(2) - 1, 1, 6, "maximum", id="ideal-hcp-oct-as-fcc-textbook"),
    pytest.param(
        "hcp", "tetrahedral", math.sqrt(1.5) - 1, 2, 4, "maximum", id="ideal-hcp-tet-as-fcc-textbook"
    ),
    pytest.param("sc", "cubic", math.sqrt(3) - 1, 1, 8, "maximum", id="sc-cube-centre-sqrt3-1-1-textbook"),
    # diamond (derived here, common practice names): the T site (1/2,1/2,1/2) has 4 atoms at the bond length
    # sqrt(3)a/4 = 2R, so r/R = 1, one per atom (the T sites form a second diamond lattice); the H site midway
    # between two T sites has 6 atoms (a puckered ring) at sqrt(11)a/8, r/R = sqrt(11/3) - 1, two per atom
    pytest.param("diamond", "tetrahedral", 1.0, 1, 4, "maximum", id="diamond-T-site-1-derived"),
    pytest.param("diamond", "hexagonal", math.sqrt(11 / 3) - 1, 2, 6, "maximum", id="diamond-H-site-derived"),
]


@pytest.fixture(scope="module")
def builtin_families() -> dict[str, dict[str, SiteFamily]]:
    return {
        name: _by_kind(find_sites(builtin_structure(name))) for name in ("fcc", "bcc", "hcp", "sc", "diamond")
    }


@pytest.mark.parametrize(("name", "kind", "ratio", "per_atom", "cn", "point"), CLOSED_FORMS)
def test_closed_forms(builtin_families, name, kind, ratio, per_atom, cn, point) -> None:
    f = builtin_families[name][kind]
    assert f.radius_ratio == pytest.approx(ratio, abs=TOL)
    assert f.per_host_atom == per_atom  # exact: an integer count divided by an integer
    assert f.coordination == cn
    assert f.critical_point == point


@pytest.mark.parametrize("name", ["fcc", "bcc", "hcp", "sc", "diamond"])
def test_no_other_families(builtin_families, name) -> None:
    # textbook: fcc, bcc, hcp have exactly octahedral + tetrahedral families, sc only the cube centre;
    # diamond the T and H sites
    expected = {"fcc": 2, "bcc": 2, "hcp": 2, "sc": 1, "diamond": 2}[name]
    assert len(builtin_families[name]) == expected


def test_bcc_octahedral_is_distorted_saddle(builtin_families) -> None:
    # BCC octahedral site: 2 neighbours at a/2 and 4 at a/sqrt(2) (textbook; a = 1 here)
    f = builtin_families["bcc"]["octahedral"]
    (d1, n1), (d2, n2) = f.neighbour_shells
    assert (n1, n2) == (2, 4)
    assert d1 == pytest.approx(0.5, abs=TOL) and d2 == pytest.approx(1 / math.sqrt(2), abs=TOL)
    assert f.distorted and f.critical_point == "saddle"
    # positions: the face centres and edge midpoints of the cube (textbook), 6 per cell
    expected = {(0, 0, 0.5), (0, 0.5, 0), (0.5, 0, 0), (0.5, 0.5, 0), (0.5, 0, 0.5), (0, 0.5, 0.5)}
    assert {tuple(float(x) for x in p) for p in f.positions} == expected


def test_fcc_sites_are_regular(builtin_families) -> None:
    for f in builtin_families["fcc"].values():
        assert not f.distorted and len(f.neighbour_shells) == 1
    # octahedral site at the cube centre, a/2 from its 6 neighbours (textbook)
    oct_ = builtin_families["fcc"]["octahedral"]
    assert [0.5, 0.5, 0.5] in oct_.positions.tolist()
    assert oct_.neighbour_shells[0][0] == pytest.approx(0.5, abs=TOL)


def _hcp_closed_forms(c_over_a: float) -> tuple[float, float]:
    """r/R of the hcp octahedral and tetrahedral sites at any c/a (a = 1), derived from the hcp positions.

    Octahedral: 6 atoms at sqrt(a^2/3 + c^2/16). Tetrahedral: base triangle of circumradius a/sqrt(3), apex
    c/2 above it on the axis; the circumcentre at height h solves a^2/3 + h^2 = (c/2 - h)^2, so
    h = (c^2/4 - a^2/3)/c, distance c/2 - h. R is half of min(a, sqrt(a^2/3 + c^2/4)).
    """
    c = c_over_a
    R = 0.5 * min(1.0, math.sqrt(1 / 3 + c * c / 4))
    d_oct = math.sqrt(1 / 3 + c * c / 16)
    d_tet = c / 2 - (c * c / 4 - 1 / 3) / c
    return d_oct / R - 1, d_tet / R - 1


@pytest.mark.parametrize(
    "c_over_a",
    [
        pytest.param(1.587, id="Ti-like-1.587"),
        pytest.param(1.886, id="Zn-like-1.886"),
        pytest.param(1.3, id="1.3"),
        pytest.param(2.5, id="2.5"),
    ],
)
def test_hcp_any_c_over_a(c_over_a: float) -> None:
    fam = _by_kind(find_sites(builtin_structure("hcp", c_over_a=c_over_a)))
    assert set(fam) == {"octahedral", "tetrahedral"}
    r_oct, r_tet = _hcp_closed_forms(c_over_a)
    assert fam["octahedral"].per_host_atom == 1 and fam["tetrahedral"].per_host_atom == 2
    assert fam["octahedral"].radius_ratio == pytest.approx(r_oct, abs=TOL)
    assert fam["tetrahedral"].radius_ratio == pytest.approx(r_tet, abs=TOL)


def test_hcp_small_c_over_a_changes_topology() -> None:
    # Below c/a = 2/sqrt(3) the circumcentre of an hcp tetrahedron falls outside it (h < 0 above): the pair of
    # tetrahedra sharing a base becomes one trigonal bipyramid whose centre (the base centre, touching the two
    # apices at c/2) is a saddle site; the octahedral family stays 1 per atom.
    fam = find_sites(builtin_structure("hcp", c_over_a=1.0))
    kinds = {f.kind: f for f in fam}
    assert "trigonal bipyramidal" in kinds and kinds["octahedral"].per_host_atom == 1
    bip = kinds["trigonal bipyramidal"]
    # 2 apices at c/2 = 0.5 and 3 base atoms at a/sqrt(3) (derived from the hcp positions)
    assert bip.neighbour_shells[0] == pytest.approx((0.5, 2), abs=TOL)
    assert bip.neighbour_shells[1] == pytest.approx((1 / math.sqrt(3), 3), abs=TOL)


def test_absolute_scale(builtin_families) -> None:
    # bcc iron, a = 2.8665 Å (from memory): octahedral hole r = a (2 - sqrt 3) / 4 (textbook closed form)
    fam = _by_kind(find_sites(builtin_structure("bcc", lattice_parameter=2.8665)))
    assert fam["octahedral"].radius == pytest.approx(2.8665 * (2 - math.sqrt(3)) / 4, abs=TOL)
    assert fam["octahedral"].absolute_scale
    assert not builtin_families["bcc"]["octahedral"].absolute_scale


def test_b2_splits_octahedral_sites() -> None:
    # B2 (CsCl type): the octahedral sites with two A apices and those with two B apices are not equivalent
    # (standard crystallography: Wyckoff 3c and 3d of Pm-3m), 3 per cell each; the 12 tetrahedral sites
    # (2A+2B) stay one family (Wyckoff 12h)
    s = Structure("B2", 2.9 * np.eye(3), [[0, 0, 0], [0.5, 0.5, 0.5]], ("A", "B"))
    fam = find_sites(s)
    octs = [f for f in fam if f.kind == "octahedral"]
    tets = [f for f in fam if f.kind == "tetrahedral"]
    assert sorted(f.per_cell for f in octs) == [3, 3] and [f.per_cell for f in tets] == [12]
    assert {f.neighbour_species[:2] for f in octs} == {("A", "A"), ("B", "B")}


# ---- properties over random lattices (hypothesis) ----


@st.composite
def random_structures(draw) -> Structure:
    """Random cells: lengths 2-4 Å, angles 65-115 degrees, 1-3 atoms at least 0.35 (V/n)^(1/3) apart."""
    a, b, c = (draw(st.floats(2.0, 4.0)) for _ in range(3))
    al, be, ga = (math.radians(draw(st.floats(65.0, 115.0))) for _ in range(3))
    cx = c * math.cos(be)
    cy = c * (math.cos(al) - math.cos(be) * math.cos(ga)) / math.sin(ga)
    cz2 = c * c - cx * cx - cy * cy
    assume(cz2 > 0.2 * c * c)
    lattice = np.array([[a, 0, 0], [b * math.cos(ga), b * math.sin(ga), 0], [cx, cy, math.sqrt(cz2)]])
    n = draw(st.integers(1, 3))
    basis = np.array([[draw(st.floats(0.0, 0.999)) for _ in range(3)] for _ in range(n)])
    try:
        s = Structure("random", lattice, basis)
    except StructureError:
        assume(False)
    assume(s.nearest_neighbour_distance > 0.35 * (s.volume / n) ** (1 / 3))
    return s


PROPERTY_SETTINGS = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _nearest_distances(s: Structure, frac: np.ndarray) -> np.ndarray:
    """Distance from each fractional point to the nearest atom, by brute force over 5x5x5 images."""
    shifts = np.stack(np.meshgrid(*[np.arange(-2, 3)] * 3, indexing="ij"), -1).reshape(-1, 3)
    atoms = (shifts[:, None, :] + s.basis[None, :, :]).reshape(-1, 3) @ s.lattice
    pts = frac @ s.lattice
    return np.min(np.linalg.norm(pts[:, None, :] - atoms[None, :, :], axis=2), axis=1)


# The finder takes distances equal within DIST_TOL * d_nn as equal (by design: near-degenerate cells such as
# a = 2.00001 Å next to 2 Å are merged), so properties that compare distances hold to that tolerance (times a
# safety factor 20 for accumulated rounding); exact identities hold to 1e-9 Å (positions are reported rounded
# to 12 decimals of their fractional coordinates, about 1e-11 Å).


def _tol(s: Structure) -> float:
    return 20 * DIST_TOL * s.nearest_neighbour_distance


@PROPERTY_SETTINGS
@given(random_structures())
def test_holes_are_empty_and_touch_their_first_shell(s: Structure) -> None:
    R = s.host_radius
    for f in find_sites(s):
        d = _nearest_distances(s, f.positions)
        # no atom closer than r + R: the hole sphere is empty (exact, up to rounding)
        assert np.all(d >= f.radius + R - 1e-9)
        # the hole sphere touches the first neighbour shell
        assert f.neighbour_shells[0][0] == pytest.approx(f.radius + R, abs=1e-12)
        assert np.allclose(d, f.neighbour_shells[0][0], rtol=0, atol=_tol(s))
        assert f.radius > 0 and f.coordination == sum(n for _, n in f.neighbour_shells)


@PROPERTY_SETTINGS
@given(random_structures())
def test_counts_are_whole_sites_per_cell(s: Structure) -> None:
    fams = find_sites(s)
    assert fams, "every lattice has at least one hole (the largest empty sphere is a maximum)"
    for f in fams:
        per_cell = f.per_host_atom * s.atoms_per_cell
        assert per_cell == pytest.approx(round(per_cell), abs=1e-12) and round(per_cell) == len(f.positions)


def _summary(fams: tuple[SiteFamily, ...]) -> list[tuple]:
    return sorted(
        (f.kind, f.coordination, f.per_host_atom, round(f.radius_ratio, 7), f.critical_point) for f in fams
    )


def _same(a: tuple[SiteFamily, ...], b: tuple[SiteFamily, ...], tol: float) -> None:
    assert len(a) == len(b)
    for fa, fb in zip(a, b, strict=True):
        assert (fa.kind, fa.coordination, fa.critical_point) == (fb.kind, fb.coordination, fb.critical_point)
        assert fa.per_host_atom == pytest.approx(fb.per_host_atom, abs=1e-12)
        assert fa.radius == pytest.approx(fb.radius, abs=tol)
        assert np.allclose(fa.neighbour_distances, fb.neighbour_distances, rtol=0, atol=tol)


@PROPERTY_SETTINGS
@given(random_structures(), st.tuples(*[st.floats(-1.0, 1.0)] * 3))
def test_invariant_under_change_of_origin(s: Structure, shift) -> None:
    moved = Structure(s.name, s.lattice.copy(), s.basis + np.array(shift), s.species)
    _same(find_sites(s), find_sites(moved), _tol(s))


@PROPERTY_SETTINGS
@given(random_structures())
def test_invariant_under_supercell(s: Structure) -> None:
    lattice = s.lattice.copy()
    lattice[0] *= 2.0
    basis = np.vstack([s.basis * [0.5, 1, 1], s.basis * [0.5, 1, 1] + [0.5, 0, 0]])
    big = Structure(s.name, lattice, basis, s.species * 2)
    small_f, big_f = find_sites(s), find_sites(big)
    _same(small_f, big_f, _tol(s))
    assert [2 * f.per_cell for f in small_f] == [f.per_cell for f in big_f]


@pytest.mark.parametrize("name", ["fcc", "bcc", "hcp", "sc", "diamond"])
def test_builtins_invariant_under_supercell_and_origin(builtin_families, name: str) -> None:
    s = builtin_structure(name)
    lattice = s.lattice.copy()
    lattice[0] *= 2.0
    basis = np.vstack([s.basis * [0.5, 1, 1], s.basis * [0.5, 1, 1] + [0.5, 0, 0]])
    big = Structure(name, lattice, basis + np.array([0.1234, 0.05, -0.3]))
    assert _summary(find_sites(big)) == _summary(tuple(builtin_families[name].values()))


# ---- misfit (Eshelby, isotropic continuum) ----
# J. D. Eshelby, Solid State Physics 3 (1956) 79: a misfitting sphere in an infinite isotropic matrix; the
# rigid solute stores 8 pi mu r^3 eps^2, a compressible one (bulk modulus K)
# 8 pi mu r^3 eps^2 * 3K / (3K + 4 mu) (derived in the docstring of solubility.geometry.sites.misfit from the matrix
# field u = A / rho^2).

MU, K = 8.2e10, 1.7e11  # Pa; round numbers of the size of iron's shear and bulk moduli, from memory


def test_misfit_zero_at_zero_eps() -> None:
    m = misfit(0.36, 0.36, host_radius=1.24, shear_modulus=MU, solute_bulk_modulus=K)
    assert m.eps == 0 and m.energy_rigid_J == 0 and m.energy_compressible_J == 0


def test_misfit_rigid_limit_and_eps_squared() -> None:
    r = 0.36
    for eps in (0.05, 0.1, -0.2, 1.0):
        m = misfit(r, r * (1 + eps), shear_modulus=MU)
        assert m.eps == pytest.approx(eps, abs=1e-14)
        assert m.energy_rigid_J == pytest.approx(8 * math.pi * MU * (r * 1e-10) ** 3 * eps**2, rel=1e-12)
    e1 = misfit(r, r * 1.1, shear_modulus=MU, solute_bulk_modulus=K).energy_compressible_J
    e2 = misfit(r, r * 1.2, shear_modulus=MU, solute_bulk_modulus=K).energy_compressible_J
    assert e2 / e1 == pytest.approx(4.0, rel=1e-12)  # proportional to eps^2


def test_misfit_compressible_form() -> None:
    r, rs = 0.36, 0.5
    rigid = misfit(r, rs, shear_modulus=MU).energy_rigid_J
    # K = 4 mu / 3 halves the energy: 3K / (3K + 4 mu) = 1/2
    half = misfit(r, rs, shear_modulus=MU, solute_bulk_modulus=4 * MU / 3).energy_compressible_J
    assert half == pytest.approx(rigid / 2, rel=1e-12)
    # a very stiff solute tends to the rigid limit
    stiff = misfit(r, rs, shear_modulus=MU, solute_bulk_modulus=1e30).energy_compressible_J
    assert stiff == pytest.approx(rigid, rel=1e-12)


def test_misfit_from_family_and_size_rule(builtin_families) -> None:
    fam = _by_kind(find_sites(builtin_structure("fcc", lattice_parameter=3.6)))
    oct_ = fam["octahedral"]
    R = 3.6 / math.sqrt(8)
    m = misfit(oct_, 0.77)  # carbon, covalent radius about 0.77 Å (from memory)
    assert m.size_ratio == pytest.approx(0.77 / R, abs=1e-12)
    assert m.fits_size_rule is (0.77 / R < SIZE_RULE_LIMIT)
    assert m.energy_rigid_J is None and m.energy_compressible_J is None
    assert misfit(0.3, 1.0, host_radius=1.5).fits_size_rule is False  # 0.667 > 0.59
    assert misfit(0.3, 0.5, host_radius=1.5).fits_size_rule is True  # 0.333 < 0.59
    with pytest.raises(InputError, match="absolute scale"):
        misfit(builtin_families["fcc"]["octahedral"], 0.77)


@pytest.mark.parametrize(
    ("args", "kwargs"),
    [
        pytest.param((0.3, -1.0), {}, id="negative-solute"),
        pytest.param((0.3, math.nan), {}, id="nan-solute"),
        pytest.param((0.0, 0.5), {}, id="zero-hole"),
        pytest.param((0.3, 0.5), {"shear_modulus": -1.0}, id="negative-mu"),
        pytest.param((0.3, 0.5), {"solute_bulk_modulus": math.inf}, id="inf-K"),
        pytest.param((0.3, "0.5"), {}, id="string-solute"),
    ],
)
def test_misfit_rejects_bad_values(args, kwargs) -> None:
    with pytest.raises(InputError) as exc:
        misfit(*args, **kwargs)
    assert "\n" not in str(exc.value)


def test_find_sites_needs_a_structure() -> None:
    with pytest.raises(InputError, match="needs a Structure"):
        find_sites("bcc")  # type: ignore[arg-type]


def test_geometry_modules_import_nothing_heavy() -> None:
    code = (
        "import sys\n"
        "import solubility.geometry.structure, solubility.geometry.sites, solubility.cli.commands.sites\n"
        "from solubility.geometry.sites import find_sites\n"
        "from solubility.geometry.structure import builtin_structure\n"
        "find_sites(builtin_structure('bcc'))\n"
        "heavy = sorted(m for m in ('pycalphad', 'xarray', 'matplotlib') if m in sys.modules)\n"
        "print(','.join(heavy))\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, timeout=120
    )
    assert out.stdout.strip() == ""
