"""The driving-force optimiser on a real assessed database, where the hard cases live.

Far below a solvus the partner candidates' optima are ultra-dilute (site fractions of 1e-23 and less) beside Gibbs
energies of order 5e5 J/mol: their driving force per atom is a small difference of large terms whose rounding
error (~1e-10 J/mol) is far above 1e-13 of the driving force itself. The optimiser once took that noise for a
failed ascent, backtracked for hundreds of iterations and reported no convergence (eight of the forty-five scan
points of this case for BCC_A2). Reference: the bundled `steel` database (see solubility/databases/README.md);
the check is the optimiser's own optimality certificate (converged) and that the optimum is no worse than the
best sampled constitution, a lower bound of the driving force.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from solubility.calc.boundary import _SCAN
from solubility.calc.host import host_potentials, prepare_host


@pytest.fixture(scope="module")
def nb_austenite():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the database's notes, not the subject here
        return prepare_host("steel", "FCC_A1", "C", fix={"NB": 0.0005}, balance="FE",
                            exclude=["GAS", "FCC_L12", "FCC2_L10"])


@pytest.mark.parametrize("phase", ["BCC_A2", "BCC_B2"])
def test_dilute_optima_of_bcc_against_nb_austenite_converge(nb_austenite, phase):
    req, T = nb_austenite, 1273.0
    failed = []
    for s in (float(g) for g in _SCAN if g < math.log(3e-3)):  # the cold scan's points below the solvus
        mu, residual = host_potentials(req, s, T)
        assert residual < 1e-9
        value, y0, _ = req.system.screen(mu, T, [phase])[phase]
        res = req.system.driving_force(phase, mu, T, y0)
        if not res.converged or not np.isfinite(res.value) or res.value < value - 1e-9:
            failed.append((math.exp(s), res.value, res.converged))
    assert not failed, f"{phase}: {len(failed)} scan points not converged or worse than a sample: {failed[:3]}"
