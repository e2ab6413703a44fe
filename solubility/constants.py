"""Physical constants shared by every layer (one value each).

R is the value pycalphad uses, so closed forms, the solver and pycalphad's own equilibrium agree to machine
precision (the 2018 CODATA value is 8.314462618 J/(mol K); the difference is 6e-6 relative).
"""

from __future__ import annotations

__all__ = ["ZERO_CELSIUS", "R"]

#: molar gas constant, J/(mol K), pycalphad's value (``pycalphad.variables.R``)
R = 8.3145
#: 0 degC in K
ZERO_CELSIUS = 273.15
