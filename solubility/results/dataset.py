"""Results: the solvus Dataset schema, unit conversion and CSV / NetCDF / JSON export.

Dataset schema (dims ``T`` and, for chemical potentials, ``component``; ``change`` for partner changes):

========== ======== =====================================================================
variable    units    meaning
========== ======== =====================================================================
X           1        mole fraction of the solute in the host phase at the solvus
W           1        mass fraction of the solute in the host phase
PPM         ppm      parts per million by mass (mg/kg)
Y           1        site fraction of the solute on the host's interstitial sublattice
partner     -        phases at zero amount on the boundary, joined by "+"; "" when none
status      -        ok, host_unstable, below_limit, no_partner or failed
converged   -        False only where the calculation failed (status "failed")
reason      -        why a point has no number; "" otherwise
MU          J/mol    chemical potentials of the elements at the boundary
DF_OTHER    J/mol    largest driving force of any other candidate phase (<= 0 on a checked boundary)
========== ======== =====================================================================

Along ``change``: ``partner_change_T`` (K), ``partner_change_X``, ``partner_change_W``, ``partner_change_PPM``,
``partner_below``, ``partner_above``. The lower end of the host's field (``X_LOW``, ``partner_low``,
``status_low``, ...), where the field opens or closes (along ``field_end``) and where the lower end's partner
changes (along ``change_low``): `solubility.results.lower_end`.
0-d: the most solute on the line (``extreme_*``) and the Arrhenius fit
(``fit_*``), see `solubility.results.summary`.

Attrs are flat and NetCDF-safe: database name and sha256, host phase, solute, site ratios, fixed contents (JSON),
excluded phases, pressure, package versions and creation time.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from solubility.calc.inputs import parse_temperatures  # re-exported: the parser lives with the validator
from solubility.constants import ZERO_CELSIUS

__all__ = [
    "CAUTION",
    "build_dataset",
    "netcdf_bytes",
    "parse_temperatures",
    "solvus_json",
    "write_csv",
    "write_json",
    "write_netcdf",
]

CAUTION = (
    "Results are only as good as the thermodynamic database; verify them against measurements before use. "
    "Applicable codes and qualified engineering practice take precedence."
)
def _versions() -> dict[str, str]:
    import numpy
    import pycalphad
    import scipy
    import xarray

    from solubility import __version__

    return {
        "solubility_version": __version__,
        "pycalphad_version": str(pycalphad.__version__),
        "numpy_version": numpy.__version__,
        "scipy_version": scipy.__version__,
        "xarray_version": xarray.__version__,
    }


def _composition(line, s: float) -> tuple[float, float, float]:
    """(x, w, y) of the solute in the host at ln(y_solute) = s."""
    if not math.isfinite(s):
        return math.nan, math.nan, math.nan
    host = line.host
    pf_moles = line.host_moles
    y = host.y(s)
    n = pf_moles @ y
    x = n / n.sum()
    k = line.elements.index(host.solute)
    mass = x * line.molar_masses
    return float(x[k]), float(mass[k] / mass.sum()), float(y[host.solute_index])


def request_attrs(job, host_model) -> dict:
    """The flat provenance attrs every result of a host request carries: database (name, sha256), host, solute,
    balance, site ratios, fix, exclude, candidates, pressure (Pa), package versions, creation time, the
    database's notes and the caution."""
    ldb = job.database
    return {
        "database": ldb.name,
        "database_sha256": ldb.sha256 or "",
        "phase": job.phase,
        "solute": job.solute,
        "balance": job.balance,
        "site_ratios": f"{host_model.a:g}:{host_model.c:g}",
        "fix": json.dumps(dict(job.fix)),
        "exclude": ",".join(job.exclude),
        "candidates": ",".join(job.candidates),
        "pressure_Pa": float(job.pressure),
        **_versions(),
        "created": datetime.now(UTC).isoformat(timespec="seconds"),
        "database_notes": " | ".join(getattr(job, "notes", ()) or ()),
        "caution": CAUTION,
    }


def build_dataset(line, job):
    """The solvus Dataset from a `solubility.calc.boundary.SolvusLine` and its `solubility.calc.host.HostRequest`."""
    import xarray as xr

    pts = line.points
    n = len(pts)
    X, W, Y = (np.full(n, np.nan) for _ in range(3))
    for i, p in enumerate(pts):
        if p.valid:
            X[i], W[i], Y[i] = _composition(line, p.s)
    change_xw = np.array([_composition(line, c.s)[:2] for c in line.changes]).reshape(-1, 2)
    T = np.array([p.T for p in pts])
    mu = np.array([p.mu for p in pts]).reshape(n, len(line.elements))
    host, solute = job.phase, job.solute
    fix_text = ", ".join(f"u({el}) = {u:g}" for el, u in job.fix) or "none"
    where = f"in {host}" + (f" ({fix_text})" if job.fix else "")
    data = {
        "X": ("T", X, {"units": "1", "long_name": f"mole fraction of {solute} {where}"}),
        "W": ("T", W, {"units": "1", "long_name": f"mass fraction of {solute} {where}"}),
        "PPM": ("T", W * 1e6, {"units": "ppm", "long_name": f"{solute} {where}, parts per million by mass"}),
        "Y": ("T", Y, {"units": "1", "long_name": f"site fraction of {solute} on the interstitial sublattice"}),
        "partner": ("T", np.array(["+".join(p.partners) for p in pts], dtype=object),
                    {"units": "", "long_name": "coexisting phase(s) at zero amount"}),
        "status": ("T", np.array([p.status for p in pts], dtype=object),
                   {"units": "", "long_name": "ok, host_unstable, below_limit, no_partner or failed"}),
        "converged": ("T", np.array([p.converged for p in pts], dtype=bool),
                      {"units": "", "long_name": "calculation reached a definite answer"}),
        "reason": ("T", np.array([p.reason for p in pts], dtype=object),
                   {"units": "", "long_name": "why the point has no number"}),
        "MU": (("T", "component"), mu, {"units": "J/mol", "long_name": "chemical potential at the solvus"}),
        "PARTNER_X": (("T", "component"), np.array([
            p.partner_x if p.valid and getattr(p, "partner_x", None) is not None
            else np.full(len(line.elements), np.nan) for p in pts]).reshape(len(pts), len(line.elements)),
            {"units": "1", "long_name": "mole fractions of the (first) partner phase at the solvus"}),
        "DF_OTHER": ("T", np.array([p.max_other_df if p.valid else np.nan for p in pts]),
                     {"units": "J/mol", "long_name": "largest driving force of another candidate phase"}),
        "partner_change_T": ("change", np.array([c.T for c in line.changes], dtype=float),
                             {"units": "K", "long_name": "temperature where the partner changes"}),
        "partner_change_X": ("change", change_xw[:, 0],
                             {"units": "1", "long_name": f"mole fraction of {solute} in {host} at the change"}),
        "partner_change_W": ("change", change_xw[:, 1],
                             {"units": "1", "long_name": f"mass fraction of {solute} in {host} at the change"}),
        "partner_change_PPM": ("change", change_xw[:, 1] * 1e6,
                               {"units": "ppm", "long_name": f"{solute} in {host} at the change, ppm by mass"}),
        "partner_below": ("change", np.array(["+".join(c.below) for c in line.changes], dtype=object),
                          {"units": "", "long_name": "partner below the change"}),
        "partner_above": ("change", np.array(["+".join(c.above) for c in line.changes], dtype=object),
                          {"units": "", "long_name": "partner above the change"}),
    }
    from solubility.results.lower_end import lower_variables

    data.update(lower_variables(line, solute, where, _composition))
    coords = {
        "T": ("T", T, {"units": "K", "long_name": "temperature"}),
        # rounded to 1e-9 K (far below the 0.01 K of a located change) so 500 K reads 226.85, not 226.85000000000002
        "T_C": ("T", np.round(T - ZERO_CELSIUS, 9), {"units": "degC", "long_name": "temperature"}),
        "component": ("component", list(line.elements), {"units": "", "long_name": "element"}),
    }
    attrs = {"title": f"solvus of {solute} in {host}", **request_attrs(job, line.host)}
    from solubility.results.summary import add_summary

    return add_summary(xr.Dataset(data, coords=coords, attrs=attrs))


# ---------------------------------------------------------------------- exports
def _nan_to_none(values) -> list:
    return [None if (isinstance(v, float) and not math.isfinite(v)) else v for v in values]


def _finite(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def _scalar(ds, name: str):
    if name not in ds:
        return None
    value = ds[name].values.item()
    if isinstance(value, float):
        return _finite(value)
    if isinstance(value, np.generic):
        return value.item()
    return value


def _summary(ds) -> tuple[dict | None, dict | None]:
    """The ``extreme`` and ``fit`` objects of the JSON (None when the line has none)."""
    if "extreme_T" not in ds:
        from solubility.results.summary import add_summary

        ds = add_summary(ds)
    ext = None
    if _scalar(ds, "extreme_X") is not None:
        w = _scalar(ds, "extreme_W")
        ext = {"temperature_K": _scalar(ds, "extreme_T"), "mole_fraction": _scalar(ds, "extreme_X"),
               "mass_fraction": w, "wt_percent": None if w is None else 100.0 * w,
               "ppm": None if w is None else 1e6 * w, "partner": str(_scalar(ds, "extreme_partner")),
               "at_range_end": bool(_scalar(ds, "extreme_at_range_end"))}
    fit = None
    if _scalar(ds, "fit_Q") is not None:
        q = _scalar(ds, "fit_Q")
        fit = {"Q_kJ_per_mol": q / 1000.0, "prefactor": _scalar(ds, "fit_A"),
               "form": "x = prefactor * exp(-Q / (R T))", "T_min_K": _scalar(ds, "fit_T_min"),
               "T_max_K": _scalar(ds, "fit_T_max"), "partner": str(_scalar(ds, "fit_partner")),
               "points": int(_scalar(ds, "fit_points")), "R2": _scalar(ds, "fit_R2")}
    return ext, fit


def solvus_json(ds) -> dict:
    """The JSON contract of ``solubility solvus --json`` for one solvus Dataset.

    Numbers are in full precision; ``extreme`` is the most solute on the line and ``fit`` the Arrhenius fit
    (null when the line has no point, or fewer than two to fit).
    """
    ok = ds["status"].values == "ok"
    ext, fit = _summary(ds)
    from solubility.results.lower_end import changes_json, lower_json

    return {
        "temperature_K": [float(t) for t in ds["T"].values],
        "mole_fraction": _nan_to_none([float(v) for v in ds["X"].values]),
        "mass_fraction": _nan_to_none([float(v) for v in ds["W"].values]),
        "site_fraction": _nan_to_none([float(v) for v in ds["Y"].values]),
        "partner_phases": [str(p).split("+") if (p and o) else [] for p, o in zip(ds["partner"].values, ok,
                                                                                   strict=True)],
        "converged": [bool(v) for v in ds["converged"].values],
        "status": [str(v) for v in ds["status"].values],
        "reason": [str(v) for v in ds["reason"].values],
        "partner_changes": changes_json(ds),
        "extreme": ext,
        "fit": fit,
        "database": ds.attrs.get("database"),
        "database_sha256": ds.attrs.get("database_sha256"),
        "phase": ds.attrs.get("phase"),
        "solute": ds.attrs.get("solute"),
        **lower_json(ds),
    }


def _cell(v) -> str:
    """A CSV cell: floats in full precision (shortest round-trip form), NaN as empty."""
    if isinstance(v, bool | np.bool_):
        return str(bool(v))
    if isinstance(v, float | np.floating):
        return repr(float(v)) if math.isfinite(float(v)) else ""
    return str(v)


def csv_text(ds) -> str:
    """CSV table (RFC 4180 quoting by the `csv` module): one row per temperature, wt% beside the fractions.

    A commented header holds the provenance, the caution, the partner changes, the most solute on the line and
    the Arrhenius fit, each number in full precision.
    """
    import csv
    import io

    buf = io.StringIO()
    for k, v in ds.attrs.items():
        buf.write(f"# {k}: {v}\n")
    from solubility.results.lower_end import CSV_COLUMNS, change_csv

    for text in change_csv(ds, _cell):
        buf.write(text)
    if "extreme_T" not in ds:
        from solubility.results.summary import add_summary

        ds = add_summary(ds)
    for name in ("extreme_T", "extreme_X", "extreme_W", "extreme_partner", "extreme_at_range_end", "fit_Q",
                 "fit_A", "fit_T_min", "fit_T_max", "fit_partner", "fit_points", "fit_R2"):
        units = ds[name].attrs.get("units")
        buf.write(f"# {name}{f' [{units}]' if units else ''}: {_cell(ds[name].values.item())}"
                  f"  ({ds[name].attrs['long_name']})\n")
    for text in change_csv(ds, _cell, low=True):
        buf.write(text)
    for i in range(ds.sizes.get("field_end", 0)):
        buf.write(f"# field_end: T [K] {_cell(ds['field_end_T'].values[i])}, X [1] "
                  f"{_cell(ds['field_end_X'].values[i])}, W [1] {_cell(ds['field_end_W'].values[i])}, "
                  f"{ds['field_end_kind'].values[i]}, meeting {ds['field_end_with'].values[i]}\n")
    cols = ["T", "T_C", "X", "W", "WT%", "PPM", "Y", "partner", "status", "reason"]
    cols += CSV_COLUMNS if "status_low" in ds else []
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([f"W{c[3:]}_percent [wt%]" if c.startswith("WT%") else (
        f"{c} [{ds[c].attrs['units']}]" if ds[c].attrs.get("units") else c) for c in cols])
    for i in range(ds.sizes["T"]):
        row = []
        for c in cols:
            v = 100.0 * float(ds["W" + c[3:]].values[i]) if c.startswith("WT%") else ds[c].values[i]
            row.append(_cell(v))
        writer.writerow(row)
    return buf.getvalue()


def write_csv(ds, path: str | Path) -> Path:
    """Write the CSV table atomically."""
    from solubility._io import atomic_write_text

    return atomic_write_text(path, csv_text(ds))


def netcdf_bytes(ds) -> bytes:
    """The Dataset as NetCDF-4 (h5netcdf) bytes, string variables stored as text.

    Encoded in memory, so that a disk that fills up fails in a plain write of bytes (a clean error) and never
    inside the HDF5 library.
    """
    out = ds.copy()
    for name in out.variables:
        if out[name].dtype == object:
            out[name] = out[name].astype(str)
    return bytes(out.to_netcdf(engine="h5netcdf"))


def write_netcdf(ds, path: str | Path) -> Path:
    """Write the Dataset as NetCDF-4 (h5netcdf) atomically (encoded in memory first, see `netcdf_bytes`)."""
    from solubility._io import atomic_write

    data = netcdf_bytes(ds)
    return atomic_write(path, lambda tmp: Path(tmp).write_bytes(data))


def write_json(ds, path: str | Path) -> Path:
    """Write the JSON contract atomically."""
    from solubility._io import atomic_write_text

    return atomic_write_text(path, json.dumps(solvus_json(ds), indent=1) + "\n")
