"""Gas standard states and gas-phase reactions for uptake from the surroundings.

Every Gibbs energy here is referred to the elements in their standard reference states at 298.15 K (SER: H = 0
for graphite, 1/2 H2, 1/2 N2, 1/2 O2 at 298.15 K and 1 bar, entropies absolute), the convention of CALPHAD
databases, so a gas potential can be set against a database's chemical potentials directly. Units: K, Pa, J/mol.

Two sources:

* the database's own reference function of the element (``GHSERHH`` for 1/2 H2, ``GHSERNN`` for 1/2 N2,
  ``GHSEROO`` for 1/2 O2), used only when it passes a numerical check: its entropy at 298.15 K must be that of
  half a mole of the diatomic gas (65.34, 95.80, 102.57 J/(mol K), NIST-JANAF, within `S298_TOL`) and its
  enthalpy at 298.15 K zero (within `H298_TOL`); a function defined per molecule, or the monatomic gas, fails;
* otherwise the NASA polynomials of McBride, Gordon and Reno (NASA TM-4513, 1993) as bundled with Cantera
  (``nasa_gas.yaml``), the optional extra ``gas``. Their standard state is 1 bar (Cantera labels the file's
  reference pressure 1 atm, but the fits reproduce the 1-bar JANAF entropies, for example S(H2, 298.15 K) =
  130.680 J/(mol K); the tests check it), and their enthalpies are enthalpies of formation, i.e. SER.

Gas mixtures (atmospheres) always use the NASA data, so every reaction is computed from one consistent source.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from solubility.constants import R
from solubility.errors import InputError

__all__ = [
    "GAS_SPECIES",
    "P0",
    "Atmosphere",
    "GasReference",
    "atmosphere_potential",
    "element_gas_reference",
    "nasa_gibbs",
]

#: standard pressure of the gas data, Pa
P0 = 1e5
#: species an atmosphere may name (AR and HE are inert)
GAS_SPECIES = ("H2", "N2", "O2", "NH3", "CO", "CO2", "CH4", "H2O", "AR", "HE")
#: elements a diatomic gas X2 is the standard state of
DIATOMIC = ("H", "N", "O")
#: S(298.15 K) of half a mole of H2, N2, O2 at 1 bar, J/(mol K): NIST-JANAF (Chase 1998) 130.680 / 2,
#: 191.609 / 2 and 205.147 / 2 (recalled from memory; the NASA fits reproduce them to 0.01)
S298_HALF = {"H": 65.340, "N": 95.805, "O": 102.574}
#: tolerance of the entropy check, J/(mol K): far below the factor-two error of a function per molecule
#: (+65 for H) or the monatomic gas (N: +58), well above the spread of assessed values (about 0.1)
S298_TOL = 1.0
#: tolerance of the enthalpy check at 298.15 K, J/mol (SER: zero; the polynomials' end points give a few J)
H298_TOL = 200.0
_NASA_NAME = {"AR": "Ar", "HE": "He"}
_NASA_SOURCE = "NASA polynomials (McBride, Gordon and Reno, NASA TM-4513, 1993) bundled with Cantera"
_ELEMENTS_OF = {"H2": {"H": 2}, "N2": {"N": 2}, "O2": {"O": 2}, "NH3": {"N": 1, "H": 3}, "CO": {"C": 1, "O": 1},
                "CO2": {"C": 1, "O": 2}, "CH4": {"C": 1, "H": 4}, "H2O": {"H": 2, "O": 1}, "AR": {}, "HE": {}}


@functools.cache
def _nasa_species() -> dict:
    try:
        import cantera
    except ImportError:
        raise InputError("gas data need Cantera (pip install 'solubility[gas]'), which supplies the NASA "
                         "polynomials for H2, N2, O2, NH3, CO, CO2, CH4 and H2O") from None
    wanted = {_NASA_NAME.get(s, s) for s in GAS_SPECIES}
    return {s.name.upper(): s.thermo for s in cantera.Species.list_from_file("nasa_gas.yaml") if s.name in wanted}


def nasa_gibbs(species: str, T: float) -> float:
    """Gibbs energy of a pure ideal gas at 1 bar, J/mol (SER), from the NASA polynomials.

    Parameters
    ----------
    species
        One of `GAS_SPECIES`.
    T
        K, within the fits' range 200-6000 K.
    """
    thermo = _nasa_species()[species]
    if not thermo.min_temp <= T <= thermo.max_temp:
        raise InputError(f"temperature {T:g} K is outside the gas data's range {thermo.min_temp:g}-"
                         f"{thermo.max_temp:g} K for {species}")
    # Cantera works per kmol
    return (thermo.h(T) - T * thermo.s(T)) / 1000.0


def _symbol_value(db, name: str, T: float) -> float:
    """Value of the database function `name` at T (and 1 bar), or nan when it cannot be evaluated."""
    from pycalphad import variables as v

    expr = db.symbols.get(name)
    if expr is None:
        return math.nan
    try:
        value = expr.subs({v.T: T, v.P: P0})
        return float(value)
    except (TypeError, ValueError, RuntimeError):
        return math.nan


@dataclass(frozen=True)
class GasReference:
    """Standard state of an element as half a mole of its diatomic gas, with the source it came from.

    Attributes
    ----------
    element
        H, N or O.
    source
        "database" (the database's reference function passed the check) or "nasa".
    description
        One line naming the data used and, when the database's function was rejected, why.
    """

    element: str
    source: str
    description: str
    _db: object = field(default=None, repr=False, compare=False)

    def gibbs(self, T: float) -> float:
        """Gibbs energy of 1/2 X2 at 1 bar per mole of X atoms, J/mol (SER)."""
        if self.source == "database":
            return _symbol_value(self._db, f"GHSER{self.element}{self.element}", T)
        return 0.5 * nasa_gibbs(f"{self.element}2", T)


def check_reference_function(db, element: str) -> tuple[bool, str]:
    """Whether the database's reference function of `element` is half a mole of X2 gas at 1 bar.

    Returns
    -------
    ok, text
        The verdict and one line with the measured S298 and H298.
    """
    name = f"GHSER{element}{element}"
    h = 0.01
    g0, g1 = _symbol_value(db, name, 298.15), _symbol_value(db, name, 298.15 + h)
    if not (math.isfinite(g0) and math.isfinite(g1)):
        return False, f"the database has no usable function {name}"
    S = -(g1 - g0) / h  # forward difference: the functions start at 298.15 K; error about h * Cp / T < 1e-3
    H = g0 + 298.15 * S
    expected = S298_HALF[element]
    text = (f"{name}: S(298.15 K) = {S:.2f} J/(mol K), H(298.15 K) = {H:.0f} J/mol; 1/2 {element}2 has "
            f"S = {expected:.2f} and H = 0")
    return abs(S - expected) <= S298_TOL and abs(H) <= H298_TOL, text


def element_gas_reference(db, element: str) -> GasReference:
    """The standard state 1/2 X2 (1 bar) of H, N or O: the database's function if it passes the check, else NASA.

    Raises
    ------
    InputError
        `element` has no diatomic gas standard state, or the database's function fails and Cantera is missing.
    """
    if element not in DIATOMIC:
        raise InputError(f"{element} has no diatomic gas standard state; a partial pressure is accepted for "
                         f"{', '.join(DIATOMIC)} (give an activity for other solutes)")
    ok, text = check_reference_function(db, element) if db is not None else (False, "no database")
    if ok:
        return GasReference(element, "database", f"database function {text}", db)
    _nasa_species()  # fails with a clear message when Cantera is missing
    return GasReference(element, "nasa", f"{_NASA_SOURCE} (database function rejected: {text})")


# ---------------------------------------------------------------------- atmospheres
#: for each solute, the reactions that set its potential, in order of preference, as (species coefficients
#: of mu_X = sum nu_k mu_k, the derived quantity's name). The first whose species are all given is used.
_REACTIONS = {
    "N": [({"NH3": 1.0, "H2": -1.5}, "nitriding potential K_N = p(NH3) / p(H2)^1.5, atm^-1/2", "NH3 = N + 3/2 H2"),
          ({"N2": 0.5}, "p(N2), Pa", "1/2 N2 = N")],
    "C": [({"CO": 2.0, "CO2": -1.0}, "carbon activity against graphite", "2 CO = C + CO2"),
          ({"CH4": 1.0, "H2": -2.0}, "carbon activity against graphite", "CH4 = C + 2 H2")],
    "O": [({"H2O": 1.0, "H2": -1.0}, "p(H2O) / p(H2)", "H2O = O + H2"),
          ({"CO2": 1.0, "CO": -1.0}, "p(CO2) / p(CO)", "CO2 = O + CO"),
          ({"O2": 0.5}, "p(O2), Pa", "1/2 O2 = O")],
    "H": [({"H2": 0.5}, "p(H2), Pa", "1/2 H2 = H")],
}
_ATM = 101325.0


@dataclass(frozen=True)
class Atmosphere:
    """A gas mixture given by the partial pressures (Pa) of its species.

    Attributes
    ----------
    pressures
        Species name -> partial pressure, Pa (> 0).
    equilibrate
        False: the mixture is taken as given (no reaction among its species; the trade's convention for
        nitriding and carburising atmospheres, which are far from gas equilibrium). True: the mixture is first
        brought to gas-phase equilibrium at T and its total pressure (Cantera, NASA data).
    """

    pressures: Mapping[str, float]
    equilibrate: bool = False

    @classmethod
    def parse(cls, spec, equilibrate: bool = False) -> Atmosphere:
        """From "NH3=0.3e5,H2=0.7e5" or a mapping; raises InputError naming the bad part."""
        if isinstance(spec, str):
            items = []
            for part in (p.strip() for p in spec.split(",")):
                if "=" not in part:
                    raise InputError(f"atmosphere part {part!r} is not SPECIES=PA, e.g. NH3=0.3e5,H2=0.7e5")
                name, _, value = part.partition("=")
                items.append((name, value))
        elif isinstance(spec, Mapping):
            items = list(spec.items())
        else:
            raise InputError(f"atmosphere {spec!r} is not SPECIES=PA,... or a mapping of species to Pa")
        out: dict[str, float] = {}
        for name, value in items:
            sp = str(name).strip().upper()
            if sp not in GAS_SPECIES:
                raise InputError(f"atmosphere species {name!r} is not one of {', '.join(GAS_SPECIES)}")
            try:
                p = float(value)
            except (TypeError, ValueError):
                raise InputError(f"atmosphere {sp}={value!r} is not a number of Pa") from None
            if not math.isfinite(p) or p <= 0:
                raise InputError(f"atmosphere {sp}={value!r}: a partial pressure must be a finite number of Pa > 0")
            if sp in out:
                raise InputError(f"atmosphere names {sp} twice")
            out[sp] = p
        if not out:
            raise InputError("atmosphere is empty; give SPECIES=PA,..., e.g. NH3=0.3e5,H2=0.7e5")
        return cls(out, bool(equilibrate))

    def reaction(self, solute: str):
        """(coefficients, derived-quantity name, reaction text) setting `solute`'s potential; InputError if none."""
        for coeffs, derived, text in _REACTIONS.get(solute, []):
            if all(sp in self.pressures for sp in coeffs):
                return coeffs, derived, text
        options = "; ".join(" and ".join(c) for c, _, _ in _REACTIONS.get(solute, [])) or "none"
        raise InputError(f"atmosphere {', '.join(self.pressures)} sets no potential of {solute}; it needs "
                         f"{options}")

    def equilibrium_pressures(self, T: float) -> dict[str, float]:
        """Partial pressures (Pa) after gas-phase equilibrium at T and the mixture's total pressure."""
        import cantera

        thermos = _nasa_species()
        elements = {el for sp in self.pressures for el in _ELEMENTS_OF[sp]}
        names = [sp for sp in GAS_SPECIES
                 if (set(_ELEMENTS_OF[sp]) <= elements if _ELEMENTS_OF[sp] else sp in self.pressures)]
        species = []
        for sp in names:
            comp = {k.capitalize(): v for k, v in _ELEMENTS_OF[sp].items()} or {_NASA_NAME[sp]: 1}
            species.append(cantera.Species(_NASA_NAME.get(sp, sp), comp))
            species[-1].thermo = thermos[sp]
        gas = cantera.Solution(thermo="ideal-gas", species=species)
        total = sum(self.pressures.values())
        # Cantera takes the file's standard state as 1 atm, but the data are at 1 bar (module docstring):
        # scaling the total pressure by 1 atm / 1 bar makes its ln(p / p_ref) that of the data
        gas.TPX = T, total * _ATM / P0, {_NASA_NAME.get(sp, sp): p for sp, p in self.pressures.items()}
        gas.equilibrate("TP")
        return {sp: float(x) * total for sp, x in zip(names, gas.X, strict=True)}


def atmosphere_potential(atm: Atmosphere, solute: str, T: float) -> tuple[float, float, str, str]:
    """Chemical potential of `solute` (J/mol, SER) set by an atmosphere at T.

    mu_X = sum_k nu_k (G_k(T, 1 bar) + R T ln(p_k / 1 bar)) over the reaction's species (for nitriding
    mu_N = mu_NH3 - 3/2 mu_H2, for the Boudouard reaction mu_C = 2 mu_CO - mu_CO2).

    Returns
    -------
    mu, derived, derived_name, reaction
        The potential, the trade's quantity (the nitriding potential K_N in atm^-1/2 with pressures in atm, the
        carbon activity is computed by the caller against the database's graphite, so `derived` is nan for C;
        a ratio or pressure otherwise), its name and the reaction used.
    """
    coeffs, derived_name, text = atm.reaction(solute)
    p = atm.equilibrium_pressures(T) if atm.equilibrate else dict(atm.pressures)
    mu = 0.0
    for sp, nu in coeffs.items():
        if p[sp] <= 0:
            raise InputError(f"{sp} has no partial pressure left after gas equilibrium at {T:g} K")
        mu += nu * (nasa_gibbs(sp, T) + R * T * math.log(p[sp] / P0))
    if solute == "N" and "NH3" in coeffs:
        derived = (p["NH3"] / _ATM) / (p["H2"] / _ATM) ** 1.5
    elif solute == "O" and "H2O" in coeffs:
        derived = p["H2O"] / p["H2"]
    elif solute == "O" and "CO2" in coeffs:
        derived = p["CO2"] / p["CO"]
    elif len(coeffs) == 1:
        derived = p[next(iter(coeffs))]
    else:
        derived = math.nan
    return mu, derived, derived_name, text + (" (gas equilibrated)" if atm.equilibrate else " (mixture as given)")
