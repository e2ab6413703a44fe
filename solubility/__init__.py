"""solubility: thermodynamics of interstitial solid solutions.

From the geometry of interstitial sites to two-sublattice CALPHAD models and exact solvus lines computed on
open thermodynamic databases. Importing the package is cheap: the public names below are loaded on first use,
so ``import solubility`` does not import pycalphad, xarray or matplotlib.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

# public name -> module that defines it (no module is named like a public function: importing a submodule
# binds its name on the package, which would shadow the function)
_EXPORTS = {
    "Structure": "geometry.structure",
    "builtin_structure": "geometry.structure",
    "read_structure": "geometry.structure",
    "load_structure": "geometry.structure",
    "SiteFamily": "geometry.sites",
    "find_sites": "geometry.sites",
    "misfit": "geometry.sites",
    "SublatticeModel": "models.sublattice",
    "dilute_solubility": "models.closed_forms",
    "add_model": "databases.extend",
    "AuditRow": "databases.audit",
    "load_database": "databases.reader",
    "audit_database": "databases.audit",
    "bundled_databases": "databases.bundled",
    "solvus": "api",
    "uptake": "api",
    "surface_map": "api",
    "reduce_database": "databases.reduce",
    "write_tdb": "databases.reduce",
    "sweep": "sweeps",
    "read_job": "sweeps",
    "Case": "sweeps",
}

__all__ = ["__version__", *sorted(_EXPORTS)]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'solubility' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
