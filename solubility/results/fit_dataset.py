"""The band Dataset: a fitted line with its lower and upper bounds at a stated confidence.

Dataset schema (dim ``T``):

========== ===== ==================================================================
variable   units meaning
========== ===== ==================================================================
X          1     mole fraction of the solute in the host on the fitted line
X_LOWER    1     lower bound of X at the confidence (attr ``confidence``)
X_UPPER    1     upper bound of X
PPM        ppm   the fitted line in ppm by mass; PPM_LOWER, PPM_UPPER its bounds
SIGMA_LNX  1     standard deviation of ln X (linearised, or over the samples)
========== ===== ==================================================================

Attrs: ``confidence``, ``band_method``, ``band_line`` (solvus, or the partial pressure or activity of the
uptake line), ``n_samples``, ``parameters`` (JSON {name: {value, stderr}}), ``covariance`` (JSON), the fit's
``chi2``, ``n_points``, the database's name and the sha256 of the text the fit started from, package versions and
the caution text.
"""

from __future__ import annotations

import hashlib
import json
from datetime import UTC, datetime
from typing import Any

import numpy as np

from solubility.constants import ZERO_CELSIUS
from solubility.results.dataset import CAUTION, _versions

__all__ = ["build_band_dataset"]


def _ppm(x: np.ndarray, m_solute: float, m_host: float) -> np.ndarray:
    """ppm by mass of a binary host-solute alloy at mole fraction x."""
    return 1e6 * x * m_solute / (x * m_solute + (1.0 - x) * m_host)


def build_band_dataset(band: Any, result: Any):
    """The Dataset of a `solubility.calc.fit_bands.Band` of the fit `result` (module docstring)."""
    import xarray as xr

    req = result.forward.req
    masses = dict(zip(req.system.elements, (float(m) for m in req.system.molar_masses), strict=True))
    ms, mh = masses[req.solute], masses[req.balance]
    x, lo, hi = np.exp(band.lnx), np.exp(band.lower), np.exp(band.upper)
    pct = f"{100 * band.confidence:g} %"
    what = f"{req.solute} in {req.phase} ({band.description})"
    data = {
        "X": ("T", x, {"units": "1", "long_name": f"mole fraction of {what}, fitted"}),
        "X_LOWER": ("T", lo, {"units": "1", "long_name": f"lower bound of the mole fraction, {pct} confidence"}),
        "X_UPPER": ("T", hi, {"units": "1", "long_name": f"upper bound of the mole fraction, {pct} confidence"}),
        "PPM": ("T", _ppm(x, ms, mh), {"units": "ppm", "long_name": f"{what}, parts per million by mass, fitted"}),
        "PPM_LOWER": ("T", _ppm(lo, ms, mh), {"units": "ppm", "long_name": f"lower bound of PPM, {pct} confidence"}),
        "PPM_UPPER": ("T", _ppm(hi, ms, mh), {"units": "ppm", "long_name": f"upper bound of PPM, {pct} confidence"}),
        "SIGMA_LNX": ("T", band.sd, {"units": "1", "long_name": f"standard deviation of ln X ({band.method})"}),
    }
    coords = {
        "T": ("T", band.T, {"units": "K", "long_name": "temperature"}),
        "T_C": ("T", band.T - ZERO_CELSIUS, {"units": "degC", "long_name": "temperature"}),
    }
    attrs = {
        "title": f"fitted {what} with its {pct} band",
        "database": str(result.extra.get("database", "")),
        "database_sha256": hashlib.sha256(result.base_text.encode("utf-8")).hexdigest() if result.base_text else "",
        "phase": req.phase,
        "solute": req.solute,
        "free": str(result.extra.get("free", "")),
        "confidence": float(band.confidence),
        "band_method": band.method,
        "band_line": band.description,
        "n_samples": int(band.n_samples),
        "parameters": json.dumps(result.to_dict()["parameters"]),
        "covariance": json.dumps(np.asarray(result.covariance).tolist()),
        "chi2": float(result.chi2),
        "n_points": int(result.n_points),
        "pressure_Pa": float(req.pressure),
        **_versions(),
        "created": datetime.now(UTC).isoformat(timespec="seconds"),
        "caution": CAUTION,
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)
