"""The surface map's Dataset: the stable phase at the surface in intervals of the solute's potential.

Dims ``T`` and ``region`` (intervals of the potential at each temperature, lowest first, padded):

============== =========== =========================================================================
variable       units       meaning
============== =========== =========================================================================
phase          -           the stable map phase in the interval ("" where none has a number or padding)
forms          -           other candidates with a positive driving force in it ("+"-joined)
lower, upper   attr units  the interval's ends in the map quantity (activity, p_X2 in Pa, K_N in atm^-1/2)
lower_activity 1           the same as the solute's activity against its reference
upper_activity 1
============== =========== =========================================================================

Interior ends are exact boundaries (two-phase equilibria); the outermost ends are the mapped range.
"""

from __future__ import annotations

import math

import numpy as np

from solubility.results.dataset import CAUTION, _versions

__all__ = ["build_surface_dataset"]


def build_surface_dataset(columns, job, *, quantity: str, units: str, long_name: str, from_ln_a, reference: str,
                          gas_source: str, map_phases):
    """Dataset of `solubility.calc.surface.surface_columns` (the map quantity through `from_ln_a(T, ln a)`)."""
    import xarray as xr

    n_T = len(columns)
    n_r = max((len(c.phases) for c in columns), default=1)
    phase = np.full((n_T, n_r), "", dtype=object)
    forms = np.full((n_T, n_r), "", dtype=object)
    lo_a, hi_a = np.full((n_T, n_r), np.nan), np.full((n_T, n_r), np.nan)
    lo_q, hi_q = np.full((n_T, n_r), np.nan), np.full((n_T, n_r), np.nan)
    for i, c in enumerate(columns):
        ends = [c.lo, *c.edges, c.hi]
        for r, name in enumerate(c.phases):
            phase[i, r], forms[i, r] = name, c.forms[r]
            lo_a[i, r], hi_a[i, r] = math.exp(ends[r]), math.exp(ends[r + 1])
            lo_q[i, r], hi_q[i, r] = from_ln_a(c.T, ends[r]), from_ln_a(c.T, ends[r + 1])
    dims = ("T", "region")
    solute = job.solute
    data = {
        "phase": (dims, phase, {"units": "", "long_name": "stable phase at the surface (map phases only)"}),
        "forms": (dims, forms, {"units": "", "long_name": "other phases with a positive driving force there"}),
        "lower": (dims, lo_q, {"units": units, "long_name": f"lower end: {long_name}"}),
        "upper": (dims, hi_q, {"units": units, "long_name": f"upper end: {long_name}"}),
        "lower_activity": (dims, lo_a, {"units": "1", "long_name": f"lower end: activity of {solute}"}),
        "upper_activity": (dims, hi_a, {"units": "1", "long_name": f"upper end: activity of {solute}"}),
    }
    attrs = {"title": f"stable phase at the surface against the {solute} potential", "database": job.database.name,
             "database_sha256": job.database.sha256 or "", "phase": job.phase, "solute": solute,
             "map_phases": ",".join(map_phases), "quantity": quantity, "quantity_units": units,
             "quantity_long_name": long_name, "reference": reference, "gas_data_source": gas_source,
             "pressure_Pa": float(job.pressure), "method": "exact boundaries (Brent on the grand potentials), "
             "bracketed on a grid in ln a", **_versions(), "caution": CAUTION}
    coords = {"T": ("T", np.array([c.T for c in columns], dtype=float), {"units": "K", "long_name": "temperature"}),
              "region": ("region", np.arange(n_r), {"units": "", "long_name": "interval, lowest potential first"})}
    return xr.Dataset(data, coords=coords, attrs=attrs)
