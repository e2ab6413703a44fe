"""One Dataset along ``case`` from the per-case solvus Datasets, and its JSON, CSV and NetCDF forms.

Layout of a sweep Dataset
-------------------------
Dims ``case`` and ``T``; ``T`` is the sorted union of every case's temperatures (K). A point that a case
did not ask for is padding: ``requested`` is False there, numbers are NaN, strings ``""`` and flags False.
A failed case has ``requested`` True at its temperatures and padding values everywhere. Other dims of the
solvus result (``component`` of ``MU``) are the sorted union over the cases, padded the same way.

Coordinates along ``T``: ``T`` (K) and ``T_C`` (degC). Along ``case``: ``case`` (the names), the inputs
``database`` (as given), ``phase``, ``solute``, ``pressure`` (Pa), ``fix`` (JSON text of the u-fractions),
``exclude`` (phase names joined by ","), ``balance`` (the balance element the solvus used; the one given, or
"", for a failed case), then ``case_status`` ("ok" or "failed") and ``case_error`` (its one-line message, ""
when ok), then the other per-case attributes of the solvus result: ``database_name``, ``database_sha256``,
``site_ratios``, ``candidates``, ... ("" for a failed case). (The solvus's own per-point ``status`` variable
keeps its name, so the per-case ones are ``case_status`` and ``case_error``.) Attributes of the sweep: the
package versions and caution of the first finished case, ``title``, ``job_sha256`` and ``created``.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from typing import Any

import numpy as np

from solubility._io import atomic_write, atomic_write_text
from solubility.errors import OutputError
from solubility.results.dataset import ZERO_CELSIUS
from solubility.sweeps.case import Case
from solubility.sweeps.store import CaseOutcome

__all__ = ["assemble", "case_dataset", "check_netcdf_engine", "csv_text", "sweep_json", "write_csv", "write_netcdf"]

#: solvus attributes kept once for the whole sweep (besides every ``*_version``)
_GLOBAL = ("caution",)
#: solvus attributes replaced by the sweep's own (inputs are coordinates; title and creation time the sweep's)
_DROPPED = {"created", "title", "phase", "solute", "pressure_Pa", "fix", "balance", "exclude"}
#: solvus attributes renamed as coordinates (the input coordinate keeps the plain name)
_RENAMED = {"database": "database_name"}
INPUT_COORDS = (
    *("database", "phase", "solute", "pressure", "fix", "exclude", "balance"),
    *("case_status", "case_error"),
)


def _fill(dtype: np.dtype) -> Any:
    if dtype.kind == "f":
        return np.nan
    if dtype.kind == "c":
        return complex(np.nan, np.nan)
    if dtype.kind == "b":
        return False
    if dtype.kind in "iu":
        return -1
    return ""


def _canonical(values: np.ndarray) -> np.ndarray:
    """Strings as numpy unicode, everything else as it is (files read back give object arrays)."""
    values = np.asarray(values)
    if values.dtype.kind in "OSU":
        return np.asarray(values.astype(str), dtype=str)
    return values


def _union(arrays: Sequence[np.ndarray]) -> np.ndarray:
    return np.unique(np.concatenate([np.asarray(a) for a in arrays])) if arrays else np.array([])


def assemble(cases: Sequence[Case], outcomes: Mapping[int, CaseOutcome], job: str):
    """Combine the outcome of every case (index -> outcome) into one sweep Dataset (see module docstring)."""
    import xarray as xr

    T = np.unique(np.concatenate([np.asarray(c.temperatures, dtype=float) for c in cases]))
    results = {i: o.data for i, o in outcomes.items() if o.ok}
    order = sorted(results)
    requested = np.zeros((len(cases), T.size), dtype=bool)
    for i, case in enumerate(cases):
        requested[i, np.searchsorted(T, case.temperatures)] = True
    extra_dims = _extra_coords([results[i] for i in order])
    data_vars: dict[str, Any] = {}
    for name in _variable_names([results[i] for i in order]):
        data_vars[name] = _stack(name, cases, results, T, extra_dims)
    data_vars["requested"] = (
        ("case", "T"),
        requested,
        {"long_name": "temperature asked for by the case (False: padding of the union of grids)"},
    )
    coords: dict[str, Any] = {
        "case": ("case", np.array([c.name for c in cases], dtype=str), {"long_name": "case"})
    }
    coords["T"] = ("T", T, _T_attrs([results[i] for i in order]))
    coords["T_C"] = ("T", T - ZERO_CELSIUS, {"units": "degC", "long_name": "temperature"})
    for dim, values in extra_dims.items():
        if any(dim in results[i].coords for i in order):
            attrs = next(dict(results[i][dim].attrs) for i in order if dim in results[i].coords)
            coords[dim] = (dim, values, attrs)
    coords.update(_input_coords(cases, outcomes))
    coords.update(_result_coords(len(cases), results))
    ds = xr.Dataset(data_vars, coords=coords)
    ds.attrs["title"] = f"sweep of {len(cases)} solvus cases"
    ds.attrs.update(_global_attrs([results[i] for i in order]))
    ds.attrs["job_sha256"] = job
    ds.attrs["created"] = datetime.now(UTC).isoformat(timespec="seconds")
    return ds


def _T_attrs(datasets: Sequence[Any]) -> dict[str, Any]:
    if datasets and "T" in datasets[0].coords:
        return dict(datasets[0]["T"].attrs)
    return {"units": "K", "long_name": "temperature"}


def _variable_names(datasets: Sequence[Any]) -> list[str]:
    names: list[str] = []
    for ds in datasets:
        names.extend(str(n) for n in ds.data_vars if n not in names)
    return names


def _extra_coords(datasets: Sequence[Any]) -> dict[str, np.ndarray]:
    """Sorted union of the values of every dim other than T (such as ``component``)."""
    dims: dict[str, list[np.ndarray]] = {}
    for ds in datasets:
        for var in ds.data_vars.values():
            for dim in var.dims:
                if dim != "T":
                    dims.setdefault(str(dim), [])
        for dim in dims:
            if dim in ds.dims:
                values = ds[dim].values if dim in ds.coords else np.arange(ds.sizes[dim])
                dims[dim].append(_canonical(values))
    return {dim: _union(arrays) for dim, arrays in dims.items()}


def _stack(name: str, cases: Sequence[Case], results: Mapping[int, Any], T: np.ndarray, extra: Mapping):
    """The (case, T, ...) array of one variable, padded (see the module docstring)."""
    first = next(results[i][name] for i in sorted(results) if name in results[i].data_vars)
    dims = ("case", *first.dims)
    dtype = _canonical(first.values).dtype
    shape = [len(cases)] + [T.size if d == "T" else extra[d].size for d in first.dims]
    out = np.full(shape, _fill(dtype), dtype=object if dtype.kind == "U" else dtype)
    for i, ds in results.items():
        if name not in ds.data_vars:
            continue
        var = ds[name].transpose(*first.dims)
        index = tuple(_positions(ds, d, T, extra) for d in first.dims)
        out[(i, *np.ix_(*index))] = _canonical(var.values)
    if dtype.kind == "U":
        out = np.asarray(out.astype(str), dtype=str)
    return dims, out, dict(first.attrs)


def _positions(ds, dim: str, T: np.ndarray, extra: Mapping[str, np.ndarray]) -> np.ndarray:
    union = T if dim == "T" else extra[dim]
    if dim == "T":
        values = ds["T"].values.astype(float)
    else:
        values = _canonical(ds[dim].values) if dim in ds.coords else np.arange(ds.sizes[dim])
    positions = np.minimum(np.searchsorted(union, values), union.size - 1)
    if not np.array_equal(union[positions], values):  # pragma: no cover - the solvus returns the T asked for
        raise RuntimeError(f"a case result has {dim} values that are not in the sweep's {dim} coordinate")
    return positions


def _input_coords(cases: Sequence[Case], outcomes: Mapping[int, CaseOutcome]) -> dict[str, Any]:
    missing = CaseOutcome(status="failed", error="not run")
    status = [outcomes.get(i, missing) for i in range(len(cases))]

    def text(values: list[str], long_name: str) -> tuple:
        return ("case", np.array(values, dtype=str), {"long_name": long_name})

    return {
        "database": text([c.database for c in cases], "database (path or bundled name)"),
        "phase": text([c.phase for c in cases], "host phase"),
        "solute": text([c.solute for c in cases], "solute element"),
        "pressure": ("case", np.array([c.pressure for c in cases]), {"units": "Pa", "long_name": "pressure"}),
        "fix": text([json.dumps(c.fix_dict, sort_keys=True) for c in cases], "fixed u-fractions (JSON)"),
        "exclude": text([",".join(c.exclude) for c in cases], "excluded phases"),
        "balance": text([_balance(c, o) for c, o in zip(cases, status, strict=True)], "balance element"),
        "case_status": text([o.status for o in status], "case status: ok or failed"),
        "case_error": text([o.error for o in status], "error of a failed case"),
    }


def _balance(case: Case, outcome: CaseOutcome) -> str:
    if outcome.ok and outcome.data.attrs.get("balance"):
        return str(outcome.data.attrs["balance"])
    return case.balance or ""


def _is_global(key: str) -> bool:
    return key.endswith("_version") or key in _GLOBAL


def _result_coords(n: int, results: Mapping[int, Any]) -> dict[str, Any]:
    """Per-case attributes of the solvus results as coordinates along case ("" or NaN for failed cases)."""
    keys: list[str] = []
    for i in sorted(results):
        keys.extend(k for k in results[i].attrs if k not in keys and k not in _DROPPED and not _is_global(k))
    coords = {}
    for key in keys:
        values = [results[i].attrs.get(key) if i in results else None for i in range(n)]
        coords[_RENAMED.get(key, key)] = ("case", _attr_column(values))
    return coords


def _attr_column(values: list[Any]) -> np.ndarray:
    present = [v for v in values if v is not None]
    numeric = all(
        isinstance(v, int | float | np.number) and not isinstance(v, bool | np.bool_) for v in present
    )
    if present and numeric:
        return np.array([np.nan if v is None else float(v) for v in values])
    return np.array(["" if v is None else _attr_text(v) for v in values], dtype=str)


def _attr_text(value: Any) -> str:
    if isinstance(value, str):
        return value
    if hasattr(value, "tolist"):
        value = value.tolist()
    return json.dumps(value)


def _global_attrs(datasets: Sequence[Any]) -> dict[str, Any]:
    if not datasets:
        return {}
    return {k: _plain(v) for k, v in datasets[0].attrs.items() if _is_global(k)}


def _plain(value: Any) -> Any:
    """numpy scalars (and 0-d arrays) as Python values."""
    if isinstance(value, np.generic) or (isinstance(value, np.ndarray) and value.ndim == 0):
        return value.item()
    return value


def case_dataset(ds, name: str):
    """The result of one case of a sweep, in the layout of `solubility.solvus`.

    Padding is dropped (temperatures the case did not ask for, and entries of other dims that hold only
    padding, such as components of other systems); the case coordinates become attributes, ``database`` being
    the database's own name (``database_input`` what the case gave) and ``pressure_Pa`` the pressure.
    """
    one = ds.sel(case=name)
    one = one.isel(T=np.flatnonzero(one["requested"].values)).drop_vars("requested")
    for dim in [d for d in one.dims if d != "T"]:
        one = one.isel({dim: _kept(one, dim)})
    attrs = dict(ds.attrs)
    for key in [k for k in one.coords if k not in one.dims and one[k].ndim == 0]:
        attrs[str(key)] = _plain(one[key].values)
        one = one.drop_vars(key)
    attrs.pop("job_sha256", None)
    attrs["database_input"] = attrs["database"]
    attrs["database"] = attrs.pop("database_name", "") or attrs["database"]
    attrs["pressure_Pa"] = attrs.pop("pressure")
    one.attrs = attrs
    return one


def _kept(one, dim: str) -> np.ndarray:
    """Indices along `dim` where some variable holds a value other than padding."""
    keep = np.zeros(one.sizes[dim], dtype=bool)
    if not keep.size:
        return np.flatnonzero(keep)
    for var in one.data_vars.values():
        if dim in var.dims:
            values = var.transpose(dim, ...).values.reshape(one.sizes[dim], -1)
            fill = _fill(values.dtype)
            pad = np.isnan(values) if values.dtype.kind == "f" else values == fill
            keep |= ~pad.all(axis=1)
    return np.flatnonzero(keep)


def sweep_json(ds) -> dict[str, Any]:
    """The JSON of a sweep: ``{"cases": [...]}``, one object per case in job order.

    Each holds ``name``, ``status`` ("ok"/"failed"), ``error``, then the keys of `solubility.solvus`'s JSON
    (``temperature_K``, ``mole_fraction``, ``mass_fraction``, ``site_fraction``, ``partner_phases``,
    ``converged``, ``reason``, ``partner_changes``, ``database``, ...) for the case's own temperatures, with
    its per-point ``status`` list renamed ``point_status``. Missing numbers are NaN here (null once emitted).
    """
    out = []
    for name in ds["case"].values.tolist():
        one = case_dataset(ds, name)
        entry = {"name": name, "status": one.attrs["case_status"], "error": one.attrs["case_error"]}
        line = _solvus_json(one)
        line["point_status"] = line.pop("status")
        entry.update(line)
        out.append(entry)
    return {"cases": out}


def _solvus_json(one) -> dict[str, Any]:
    if "X" in one.data_vars:
        from solubility.results.dataset import solvus_json

        return solvus_json(one)
    n = one.sizes["T"]
    return {
        "temperature_K": [float(t) for t in one["T"].values],
        "mole_fraction": [None] * n,
        "mass_fraction": [None] * n,
        "site_fraction": [None] * n,
        "partner_phases": [[] for _ in range(n)],
        "converged": [False] * n,
        "status": [""] * n,
        "reason": [""] * n,
        "partner_changes": [],
        "database": one.attrs.get("database"),
        "database_sha256": one.attrs.get("database_sha256", ""),
        "phase": one.attrs.get("phase"),
        "solute": one.attrs.get("solute"),
    }


#: columns of the CSV table: case coordinates, then T and the per-point variables
_CSV_CASE = ("case", *INPUT_COORDS)


def csv_text(ds) -> str:
    """The sweep as a CSV table, one row per requested (case, temperature); MU as one column per component."""
    point_vars = [n for n in ds.data_vars if n != "requested" and ds[n].dims == ("case", "T")]
    mu_vars = [n for n in ds.data_vars if len(ds[n].dims) == 3]
    header = [*_CSV_CASE, "T", *point_vars]
    for n in mu_vars:
        header += [f"{n}_{c}" for c in ds[ds[n].dims[2]].values.tolist()]
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    T = ds["T"].values
    for i in range(ds.sizes["case"]):
        case_values = [_cell(ds[k].values[i]) for k in _CSV_CASE]
        for j in np.flatnonzero(ds["requested"].values[i]):
            row = [*case_values, _cell(T[j]), *(_cell(ds[n].values[i, j]) for n in point_vars)]
            for n in mu_vars:
                row += [_cell(v) for v in ds[n].values[i, j]]
            writer.writerow(row)
    return buffer.getvalue()


def _cell(value: Any) -> str:
    value = _plain(value)
    if isinstance(value, float):
        return "" if not np.isfinite(value) else repr(value)
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


def write_csv(ds, path: str | os.PathLike) -> None:
    """Write `csv_text` of the sweep atomically to `path`."""
    atomic_write_text(path, csv_text(ds))


def check_netcdf_engine() -> None:
    """Raise an OutputError unless NetCDF-4 files can be written (h5netcdf and its h5py backend)."""
    try:
        import h5netcdf  # noqa: F401
        import h5py  # noqa: F401
    except ImportError:
        raise OutputError("NetCDF output needs h5netcdf and h5py (dependencies of solubility): "
                          "pip install h5netcdf h5py") from None


def write_netcdf(ds, path: str | os.PathLike) -> None:
    """Write the sweep Dataset atomically to `path` (NetCDF-4 through h5netcdf; strings as text)."""
    check_netcdf_engine()
    atomic_write(path, lambda tmp: ds.to_netcdf(tmp, engine="h5netcdf"))
