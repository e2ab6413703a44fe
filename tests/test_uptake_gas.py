"""Gas standard states against NIST-JANAF, the database-function check, and atmospheres.

Reference values (SER convention: G = H - T S with H = 0 for the elements at 298.15 K; 1 bar):
- H2, N2 at 298.15 K: G = -T S298 with S298 = 130.680 and 191.609 J/(mol K), NIST-JANAF (Chase 1998), recalled
  from memory (the NIST WebBook lists the same numbers);
- H2, N2 at 1000 K: JANAF H - H298 = 20.680 and 21.463 kJ/mol, S = 166.216 and 228.170 J/(mol K), recalled from
  memory;
- NH3: Delta_f H(298.15) = -45.90 kJ/mol and S298 = 192.77 J/(mol K), NIST WebBook citing Chase 1998 (looked
  up); Delta_f G(1000 K) = +61.91 kJ/mol, JANAF, recalled from memory.
Tolerances: 30 J/mol for H2 and N2 (the NASA fits reproduce JANAF to about 0.02 J/(mol K) in S, i.e. 20 J/mol
at 1000 K); 60 J/mol for NH3 at 298.15 K (the NASA data use the CODATA Delta_f H, -45.94, 40 J/mol from JANAF's);
100 J/mol for Delta_f G(NH3, 1000 K) (the recalled value's last digit and the same CODATA offset).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from solubility.errors import InputError
from solubility.thermo.gas import (
    Atmosphere,
    atmosphere_potential,
    check_reference_function,
    element_gas_reference,
    nasa_gibbs,
)


@pytest.mark.parametrize(("species", "T", "G_ref", "tol"), [
    ("H2", 298.15, -298.15 * 130.680, 30.0),
    ("N2", 298.15, -298.15 * 191.609, 30.0),
    ("H2", 1000.0, 20680.0 - 1000.0 * 166.216, 30.0),
    ("N2", 1000.0, 21463.0 - 1000.0 * 228.170, 30.0),
    ("NH3", 298.15, -45900.0 - 298.15 * 192.77, 60.0),
])
def test_gibbs_against_janaf(species, T, G_ref, tol):
    assert abs(nasa_gibbs(species, T) - G_ref) < tol


def test_ammonia_formation_energy_at_1000K():
    dG = nasa_gibbs("NH3", 1000.0) - 0.5 * nasa_gibbs("N2", 1000.0) - 1.5 * nasa_gibbs("H2", 1000.0)
    assert abs(dG - 61910.0) < 100.0


def _db_with(function_lines: str):
    from solubility.databases.reader import _parse_text

    text = (" ELEMENT VA VACUUM 0 0 0 !\n ELEMENT H 1/2_MOLE_H2(GAS) 1.008 0 0 !\n"
            f"{function_lines}"
            " PHASE X % 1 1 !\n CONSTITUENT X :H: !\n PARAMETER G(X,H;0) 298.15 0; 6000 N !\n")
    db, _ = _parse_text(text, "invented")
    return db


def test_reference_function_per_atom_accepted_per_molecule_rejected():
    # invented linear functions with the JANAF entropy: per H atom (65.34) and per H2 molecule (130.68)
    good = _db_with(" FUNCTION GHSERHH 298.15 -65.34*T; 6000 N !\n")
    bad = _db_with(" FUNCTION GHSERHH 298.15 -130.68*T; 6000 N !\n")
    assert check_reference_function(good, "H")[0]
    ok, text = check_reference_function(bad, "H")
    assert not ok and "130.68" in text
    ref = element_gas_reference(bad, "H")
    assert ref.source == "nasa" and "rejected" in ref.description
    assert abs(ref.gibbs(1000.0) - 0.5 * nasa_gibbs("H2", 1000.0)) < 1e-9
    assert element_gas_reference(good, "H").source == "database"


def test_nitriding_potential_and_equilibrated_mixture():
    atm = Atmosphere.parse("NH3=0.3e5,H2=0.7e5")
    mu, kn, name, reaction = atmosphere_potential(atm, "N", 843.0)
    assert "K_N" in name and "as given" in reaction
    np.testing.assert_allclose(kn, (0.3e5 / 101325) / (0.7e5 / 101325) ** 1.5, rtol=1e-12)
    # equilibrated: every reaction of the gas gives one potential (a property of gas equilibrium)
    eq = Atmosphere.parse("NH3=0.3e5,H2=0.7e5", equilibrate=True)
    p = eq.equilibrium_pressures(843.0)
    mu_eq, _, _, _ = atmosphere_potential(eq, "N", 843.0)
    R = 8.3145
    mu_n2 = 0.5 * (nasa_gibbs("N2", 843.0) + R * 843.0 * math.log(p["N2"] / 1e5))
    assert abs(mu_eq - mu_n2) < 1e-3 * R * 843.0
    assert mu_eq < mu  # ammonia is far above its equilibrium: that is what nitriding uses


@pytest.mark.parametrize("spec", ["", "NH3", "NH3=abc,H2=1", "NH3=-1,H2=1e5", "NH3=nan,H2=1", "XE=1e5",
                                  "NH3=1e4,NH3=2e4"])
def test_bad_atmosphere_strings(spec):
    with pytest.raises(InputError):
        Atmosphere.parse(spec)


def test_atmosphere_without_a_reaction_for_the_solute():
    with pytest.raises(InputError, match="sets no potential of C"):
        Atmosphere.parse("H2=1e5,N2=1e4").reaction("C")
