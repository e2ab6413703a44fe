"""SublatticeModel, its TDB text and the closed forms of `solubility.models.sublattice`.

References: site counts per host atom are textbook crystallography (fcc: 1 octahedral and 2 tetrahedral sites per
atom; bcc: 3 octahedral and 6
tetrahedral; hcp: 1 octahedral and 2 tetrahedral; e.g. Porter, Easterling and Sherif, Phase Transformations in
Metals and Alloys, 3rd ed., section 2.3; from memory). The site ratios of FCC_A1 1:1, BCC_A2 1:3, HCP_A3 1:0.5
are those of the SGTE unary data (Dinsdale, Calphad 15 (1991) 317). The closed forms are checked against
sympy's own algebra, the Boltzmann count of configurations, and
pycalphad's equilibrium on ideal models built by the tool.
"""

from __future__ import annotations

import math
import subprocess
import sys
import warnings

import numpy as np
import pytest
from ideal_systems import IDEAL_CASES, ideal_db

from solubility.errors import InputError, StructureError
from solubility.models.closed_forms import (
    GAS_CONSTANT,
    dilute_solubility,
    formulas,
    ideal_entropy,
    x_from_y,
    y_from_x,
)
from solubility.models.sublattice import SublatticeModel


def test_import_does_not_pull_heavy_modules():
    # design.md: model never imports pycalphad, xarray or matplotlib (sympy only inside functions)
    code = (
        "import sys, solubility.models.sublattice, solubility.models.closed_forms, solubility.models.tdb_writer\n"
        "import solubility.models.tdb_commands\n"
        "bad = [m for m in ('pycalphad', 'xarray', 'matplotlib', 'sympy') if m in sys.modules]\n"
        "print(','.join(bad))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


# ---- building models ----------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("structure", "kind", "blocking", "ratio"),
    [
        ("bcc", "octahedral", 0.0, 3.0),  # BCC_A2 1:3 (SGTE, Dinsdale 1991); 3 octahedral sites per atom
        ("bcc", "tetrahedral", 0.0, 6.0),  # 6 tetrahedral sites per bcc atom (textbook, from memory)
        ("fcc", "octahedral", 0.0, 1.0),  # FCC_A1 1:1 (SGTE, Dinsdale 1991)
        ("fcc", "tetrahedral", 0.0, 2.0),  # 2 tetrahedral sites per fcc atom (textbook, from memory)
        ("hcp", "octahedral", 0.5, 0.5),  # HCP_A3 1:0.5 = octahedral, half blocked (SGTE, Dinsdale 1991)
    ],
)
def test_from_structure_site_ratio(structure, kind, blocking, ratio):
    m = SublatticeModel.from_structure(None, "FE", "C", structure, kind, blocking=blocking)
    assert m.c == pytest.approx(ratio, rel=1e-9)  # the site finder counts exactly; 1e-9 is float noise
    assert m.a == 1.0
    assert m.sites_per_host_atom == pytest.approx(ratio / (1 - blocking), rel=1e-9)
    assert m.site_kind == kind
    assert m.constituents == (("FE",), ("C", "VA"))


def test_default_names_and_site():
    m = SublatticeModel.from_structure(None, "fe", ["c"], "BCC")
    assert (m.phase, m.site_kind, m.hosts, m.interstitials) == ("BCC_A2", "octahedral", ("FE",), ("C",))
    assert SublatticeModel.from_structure(None, "FE", "C", "hcp").phase == "HCP_A3"


def test_from_site_family_uses_family_count():
    from solubility.geometry.sites import find_sites
    from solubility.geometry.structure import builtin_structure

    fam = next(f for f in find_sites(builtin_structure("bcc")) if f.kind == "octahedral")
    m = SublatticeModel.from_site_family("BCC_A2", ["FE", "CR"], ["C", "N"], fam, blocking=0.25, a=2.0)
    assert m.c == pytest.approx(2.0 * 3.0 * 0.75, rel=1e-12)  # c = a n (1 - b), design.md
    assert m.constituents == (("FE", "CR"), ("C", "N", "VA"))


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"phase": "BAD NAME"}, "phase name"),
        ({"hosts": ("VA",)}, "VA"),
        ({"hosts": ("IRON",)}, "element symbol"),
        ({"interstitials": ()}, "no interstitials"),
        ({"interstitials": ("FE",)}, "both as host"),
        ({"c": 0.0}, "greater than zero"),
        ({"a": float("nan")}, "finite"),
        ({"blocking": 1.0}, r"\[0, 1\)"),
        ({"blocking": -0.1}, r"\[0, 1\)"),
        ({"sites_per_host_atom": 3.0, "c": 2.0}, "disagrees"),
    ],
)
def test_invalid_models_raise_input_error(kwargs, match):
    base = {"phase": "BCC_A2", "hosts": ("FE",), "interstitials": ("C",), "a": 1.0, "c": 3.0}
    base.update(kwargs)
    with pytest.raises(InputError, match=match):
        SublatticeModel(**base)


def test_unknown_site_kind_lists_the_kinds():
    with pytest.raises(StructureError, match="octahedral"):
        SublatticeModel.from_structure(None, "FE", "C", "fcc", "cubic")


# ---- TDB text -----------------------------------------------------------------------------------------
def test_tdb_block_placeholders_and_parameters():
    m = SublatticeModel.from_structure(None, "FE", "C", "bcc")
    text = m.tdb_block({"g(bcc_a2,fe:c;0)": "+322050+75.667*T"})
    assert " PHASE BCC_A2 % 2 1 3 !" in text
    assert " CONSTITUENT BCC_A2 :FE:C,VA: !" in text
    assert " PARAMETER G(BCC_A2,FE:C;0) 298.15 +322050+75.667*T; 6000 N !" in text
    assert "PLACEHOLDER" in text and " PARAMETER G(BCC_A2,FE:VA;0) 298.15 0; 6000 N !" in text
    assert "G(BCC_A2,FE:C;0) 298.15 0;" not in text  # a given end-member gets no placeholder


@pytest.mark.parametrize(
    ("key", "expr", "match"),
    [
        ("G(FCC_A1,FE:C;0)", "1", "names phase"),
        ("G(BCC_A2,FE:N;0)", "1", "not on sublattice 2"),
        ("G(BCC_A2,FE;0)", "1", "1 sublattices"),
        ("G BCC_A2 FE:C", "1", "not of the form"),
        ("G(BCC_A2,FE:C;0)", "__import__('os').system('true')", "not accepted"),
        ("G(BCC_A2,FE:C;0)", "9**9**9", "exponent"),
        ("G(BCC_A2,FE:C;0)", "1 ! PHASE X", "not accepted"),
        ("G(BCC_A2,FE:C;0)", "  ", "empty"),
    ],
)
def test_bad_parameters(key, expr, match):
    m = SublatticeModel.from_structure(None, "FE", "C", "bcc")
    with pytest.raises(InputError, match=match):
        m.tdb_block({key: expr})


# ---- closed forms -------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("a", "c", "x_full"),
    [
        (1.0, 1.0, 0.5),  # FCC_A1 filled: MX, rock salt (e.g. TiC)
        (1.0, 3.0, 0.75),  # BCC_A2 filled: MX3
        (1.0, 0.5, 1.0 / 3.0),  # HCP_A3 filled: M2X (design.md)
    ],
)
def test_x_of_filled_end_member(a, c, x_full):
    # stoichiometry of the filled end-member: x = c / (a + c)
    assert x_from_y(1.0, a, c) == pytest.approx(x_full, rel=1e-15)
    assert y_from_x(x_full, a, c) == pytest.approx(1.0, rel=1e-12)


def test_x_y_round_trip_and_limits():
    y = np.linspace(0, 1, 11)
    assert np.allclose(y_from_x(x_from_y(y, 1.0, 3.0), 1.0, 3.0), y, rtol=1e-12, atol=1e-15)
    with pytest.raises(InputError, match="within"):
        y_from_x(0.8, 1.0, 3.0)  # above x = 3/4 no site fraction gives it
    with pytest.raises(InputError, match="within"):
        x_from_y(1.2, 1.0, 1.0)


def test_ideal_entropy_boltzmann_count():
    # S = k ln W: W = C(cN, ycN) configurations of ycN atoms on cN sites; per mole of formula units,
    # S / R = ln C(cN, ycN) / N in the large-N limit (Stirling); N = 1e7: Stirling error ~ ln(N)/N ~ 2e-6.
    a, c, y, N = 1.0, 3.0, 0.2, 10_000_000
    sites, atoms = c * N, y * c * N
    lnW = math.lgamma(sites + 1) - math.lgamma(atoms + 1) - math.lgamma(sites - atoms + 1)
    s_fu, s_atom = ideal_entropy(y, a, c)
    assert s_fu == pytest.approx(GAS_CONSTANT * lnW / N, rel=1e-5)
    assert s_atom == pytest.approx(s_fu / (a + c * y), rel=1e-15)  # a + c y atoms per formula unit


def test_ideal_entropy_maximum_and_host_mixing():
    # maximum at y = 1/2: c R ln 2 (mathematical identity of the ideal form)
    assert ideal_entropy(0.5, 1.0, 0.5)[0] == pytest.approx(0.5 * GAS_CONSTANT * math.log(2), rel=1e-14)
    assert ideal_entropy(0.0, 1.0, 3.0)[0] == 0.0
    s_fu, _ = ideal_entropy(0.0, 1.0, 3.0, host_fractions=[0.5, 0.5])
    assert s_fu == pytest.approx(GAS_CONSTANT * math.log(2), rel=1e-14)


def test_formulas_agree_with_sympy_derivatives():
    import sympy as sp

    f = formulas()
    y, c, a, R, T, A, B, G_X, G_MVA = sp.symbols("y c a R T A B G_X G_MVA", positive=True)
    # mu_X = G_X + dG/c + RT ln(y/(1-y)) (module docstring), from dG/dy / c
    expected = G_X + (A + B * T) / c + R * T * sp.log(y / (1 - y))
    assert sp.simplify(sp.expand_log(f["mu_X"] - expected, force=True)) == 0
    # a mu_M = G(M:VA) + c R T ln(1 - y)
    assert sp.simplify(sp.expand_log(a * f["mu_M"] - (G_MVA + c * R * T * sp.log(1 - y)), force=True)) == 0
    # Gibbs-Duhem per formula unit: a mu_M + c y mu_X = G
    assert sp.simplify(sp.expand_log(a * f["mu_M"] + c * y * f["mu_X"] - f["G"], force=True)) == 0


def test_dilute_solubility_solves_the_equilibrium_equation():
    import sympy as sp

    f = formulas()
    args = {
        "a": 1.0,
        "c": 3.0,
        "p": 3.0,
        "q": 1.0,
        "A": 60000.0,
        "B": -5.0,
        "T": 900.0,
        "R": GAS_CONSTANT,
        "dGf": -16000.0,
        "G_MVA": -1000.0,
        "G_X": 0.0,
    }
    res = dilute_solubility(
        900.0, 60000.0, -5.0, a=1.0, c=3.0, partner_host=3, partner_solute=1, partner_A=-16000.0
    )
    subs = {sp.Symbol(k, positive=True): v for k, v in args.items()}
    subs[sp.Symbol("y", positive=True)] = res.y
    residual = float(f["equilibrium"].subs(subs))
    assert abs(residual) < 1e-6  # J/mol; brentq converges y to 1e-15 relative, RT ~ 7.5e3 J/mol


def test_dilute_limits_and_errors():
    r = dilute_solubility([600.0, 900.0], 50000.0, 0.0, a=1.0, c=1.0)
    # pure-solute partner: y/(1-y) = exp(-dG/(cRT)), Henry y = exp(-dG/(cRT)); they differ by O(y)
    assert np.allclose(
        r.y / (1 - r.y), np.exp(-50000.0 / (GAS_CONSTANT * np.array([600.0, 900.0]))), rtol=1e-12
    )
    assert np.allclose(r.y_henry, r.y, rtol=2 * r.y.max())
    with pytest.raises(InputError, match="temperature"):
        dilute_solubility(-1.0, 0.0)
    with pytest.raises(InputError, match="partner_host"):
        dilute_solubility(1000.0, 0.0, partner_host=-1)


# ---- against pycalphad's equilibrium -----------------------------------------------------------------
@pytest.mark.parametrize(("c", "A", "B", "p", "q", "GA", "GB"), IDEAL_CASES)
def test_dilute_closed_form_matches_pycalphad_equilibrium(c, A, B, p, q, GA, GB):
    from pycalphad import equilibrium
    from pycalphad import variables as v

    T = 1000.0
    ref = dilute_solubility(T, A, B, a=1.0, c=c, partner_host=p, partner_solute=q, partner_A=GA, partner_B=GB)
    assert 1e-3 < ref.y < 0.5  # the invented data put y where relative errors are meaningful
    x_overall = 0.5 * (ref.x + q / (p + q))  # inside the two-phase field
    db = ideal_db(c, A, B, p, q, GA, GB)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pycalphad's own numerical warnings are not under test here
        eq = equilibrium(
            db, ["FE", "C", "VA"], ["SS", "PARTNER"], {v.T: T, v.P: 101325, v.N: 1, v.X("C"): x_overall}
        )
    phases = list(eq.Phase.values.squeeze())
    assert "SS" in phases and "PARTNER" in phases
    y_pyc = float(eq.Y.values.squeeze()[phases.index("SS")][1])  # Y = (FE; C, VA): index 1 is C
    # 1e-6 relative (the tolerance): pycalphad converges chemical potentials far below that
    assert y_pyc == pytest.approx(ref.y, rel=1e-6)
