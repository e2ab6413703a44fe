"""Physical constants and conventions of the trade shared by every layer (one value each; plain data, no imports).

R is the value pycalphad uses, so closed forms, the solver and pycalphad's own equilibrium agree to machine
precision (the 2018 CODATA value is 8.314462618 J/(mol K); the difference is 6e-6 relative).
"""

from __future__ import annotations

__all__ = [
    "DEFAULT_PHASE_NAMES",
    "DEFAULT_SITE_KIND",
    "INTERSTITIAL_ELEMENTS",
    "MAGNETIC_CONSTANTS",
    "ZERO_CELSIUS",
    "R",
]

#: molar gas constant, J/(mol K), pycalphad's value (``pycalphad.variables.R``)
R = 8.3145
#: 0 degC in K
ZERO_CELSIUS = 273.15


#: the light elements that usually dissolve interstitially (common practice, no source)
INTERSTITIAL_ELEMENTS = ("B", "C", "H", "N", "O")

#: default phase name for each built-in lattice: the Strukturbericht tag convention of the SGTE unary data
#: (Dinsdale, Calphad 15 (1991) 317); simple cubic (alpha-Po, Strukturbericht A_h) is not an SGTE phase, the
#: name SC_AH is this tool's choice.
DEFAULT_PHASE_NAMES = {
    "fcc": "FCC_A1",
    "bcc": "BCC_A2",
    "hcp": "HCP_A3",
    "diamond": "DIAMOND_A4",
    "sc": "SC_AH",
}

#: the site family C and N usually occupy in each lattice (common practice, no source: octahedral in fcc,
#: bcc and hcp; the hexagonal site of diamond cubic and the cube centre of simple cubic are the largest holes)
DEFAULT_SITE_KIND = {
    "fcc": "octahedral",
    "bcc": "octahedral",
    "hcp": "octahedral",
    "diamond": "tetrahedral",
    "sc": "cubic",
}

#: constants of the Inden-Hillert-Jarl magnetic model by lattice: (antiferromagnetic factor, structure factor p),
#: as TDB files write them (``AMEND_PHASE_DESCRIPTION ... MAGNETIC -1.0 0.4``): bcc -1 and 0.40, fcc and hcp -3
#: and 0.28 (common practice of the SGTE unary data, Dinsdale, Calphad 15 (1991) 317; no other source)
MAGNETIC_CONSTANTS = {
    "bcc": (-1.0, 0.40),
    "fcc": (-3.0, 0.28),
    "hcp": (-3.0, 0.28),
}
