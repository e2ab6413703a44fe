"""One Dataset along ``case`` from the per-case Datasets (`xarray.concat`, outer join), and its JSON and CSV.

Dims ``case`` and ``T`` (the sorted union of the cases' temperatures, K; ``T_C`` in degC); ``requested`` is True
at a case's own temperatures, elsewhere values are padding (NaN, ``""``, False), and a failed case is padding
everywhere, as are uptake variables on solvus cases and the other way round. Other dims (``component`` of ``MU``)
are the union over the cases; ``change`` is padded to the longest. Coordinates along ``case``: the inputs
(`INPUT_COORDS`: ``fix`` as JSON, ``exclude`` joined by ",", ``balance`` the one used), ``case_status``,
``case_error``, ``kind``, then the other attributes of each result (``database_name``, ``site_ratios``, ...;
"" or NaN where a case has none). Attributes: the versions and caution of the first finished case, ``title``,
``job_sha256`` and ``created``.
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
from solubility.constants import ZERO_CELSIUS
from solubility.sweeps.job import Case, job_sha256
from solubility.sweeps.store import canonical

__all__ = ["assemble", "case_dataset", "csv_text", "sweep_json", "write_csv", "write_netcdf"]

#: dimensions of events along a line (partner changes at either end, ends of the field), padded case by case
_EVENT_DIMS = ("change", "field_end", "change_low")
#: solvus attributes that are inputs (coordinates already) or the sweep's own
_DROPPED = {"created", "title", "phase", "solute", "pressure_Pa", "fix", "balance", "exclude"}
INPUT_COORDS = ("database", "phase", "solute", "pressure", "fix", "exclude", "balance", "case_status", "case_error",
                "kind")


def _fill(dtype: np.dtype) -> Any:
    return {"f": np.nan, "c": complex(np.nan, np.nan), "b": False, "i": -1, "u": 0}.get(dtype.kind, "")


def _is_global(key: str) -> bool:
    return key.endswith("_version") or key == "caution"


def _value(value: Any) -> Any:
    """An attribute as a case coordinate: a number as float, text as it is, anything else as JSON."""
    if isinstance(value, int | float | np.number) and not isinstance(value, bool):
        return float(value)
    return value if isinstance(value, str) else json.dumps(np.asarray(value).tolist())


def _part(case: Case, ds: Any, error: str | None):
    """One case along ``case``: its Dataset (a failed case: its temperatures alone), ``requested``, and its
    inputs, status and other attributes as variables (coordinates once the parts are concatenated)."""
    import xarray as xr

    if ds is None:
        ds = xr.Dataset(coords={"T": list(case.temperatures)})
    else:
        ds = canonical(ds).drop_vars("T_C", errors="ignore")
        ds = ds.assign_coords({d: np.arange(ds.sizes[d]) for d in _EVENT_DIMS if d in ds.dims})
    info = {
        "database": (case.database, {"long_name": "database (path or bundled name)"}),
        "phase": (case.phase, {"long_name": "host phase"}),
        "solute": (case.solute, {"long_name": "solute element"}),
        "pressure": (case.pressure, {"units": "Pa", "long_name": "pressure"}),
        "fix": (json.dumps(case.fix_dict, sort_keys=True), {"long_name": "fixed u-fractions (JSON)"}),
        "exclude": (",".join(case.exclude), {"long_name": "excluded phases"}),
        "balance": (str(ds.attrs.get("balance", "")) if error is None else case.balance or "",
                    {"long_name": "balance element"}),
        "kind": (case.kind, {"long_name": "case kind: solvus or uptake (`solubility.uptake`)"}),
        "case_status": ("ok" if error is None else "failed", {"long_name": "case status: ok or failed"}),
        "case_error": (error or "", {"long_name": "error of a failed case"}),
    }
    info.update({"database_name" if k == "database" else k: (_value(v), {}) for k, v in ds.attrs.items()
                 if k not in _DROPPED and not _is_global(k)})
    requested = ("T", np.ones(ds.sizes["T"], dtype=bool),
                 {"long_name": "temperature asked for by the case (False: padding of the union of grids)"})
    return ds.assign(requested=requested, **{k: ((), v, attrs) for k, (v, attrs) in info.items()}), list(info)


def assemble(cases: Sequence[Case], results: Mapping[int, Any], errors: Mapping[int, str]):
    """The sweep Dataset of the finished cases' Datasets (index -> Dataset) and the failed ones' messages."""
    import xarray as xr

    order = [*sorted(results), *(i for i in range(len(cases)) if i not in results)]  # variables in a result's order
    parts = [_part(cases[i], results.get(i), None if i in results else errors.get(i, "not run")) for i in order]
    names = [c.name for c in cases]
    fills = {n: _fill(v.dtype) for p, _ in parts for n, v in p.data_vars.items()}
    ds = xr.concat([p.expand_dims(case=[cases[i].name]) for i, (p, _) in zip(order, parts, strict=True)], "case",
                   join="outer", fill_value=fills, combine_attrs="drop_conflicts", coords="minimal", data_vars="all")
    ds = ds.sel(case=names).set_coords(list(dict.fromkeys(k for _, keys in parts for k in keys)))
    ds = ds.drop_vars(list(_EVENT_DIMS), errors="ignore")
    first = results[order[0]] if results else None
    ds.attrs = {k: v for k, v in first.attrs.items() if _is_global(k)} if first is not None else {}
    ds["T"].attrs = dict(first["T"].attrs) if first is not None else {"units": "K", "long_name": "temperature"}
    ds["case"] = ("case", np.array(names, dtype=str), {"long_name": "case"})
    ds = ds.assign_coords(T_C=("T", ds["T"].values - ZERO_CELSIUS, {"units": "degC", "long_name": "temperature"}))
    kinds = " and ".join(sorted({c.kind for c in cases}))
    ds.attrs.update(title=f"sweep of {len(cases)} {kinds} cases", job_sha256=job_sha256(list(cases)),
                    created=datetime.now(UTC).isoformat(timespec="seconds"))
    return ds


def case_dataset(ds, name: str):
    """One case of a sweep in the layout of `solubility.solvus`: its own temperatures, no padding elsewhere.

    The case coordinates become attributes; ``database`` is the database's own name (``database_input`` what
    the case gave) and ``pressure_Pa`` the pressure.
    """
    one = ds.sel(case=name)
    one = one.isel(T=np.flatnonzero(one["requested"].values)).drop_vars("requested")
    for dim in [d for d in one.dims if d != "T" and one.sizes[d]]:
        keep = np.zeros(one.sizes[dim], dtype=bool)
        for var in (v for v in one.data_vars.values() if dim in v.dims):
            values = var.transpose(dim, ...).values.reshape(one.sizes[dim], -1)
            pad = np.isnan(values) if values.dtype.kind == "f" else values == _fill(values.dtype)
            keep |= ~pad.all(axis=1)
        one = one.isel({dim: np.flatnonzero(keep)})
    attrs = dict(ds.attrs)
    for key in [k for k in one.coords if k not in one.dims and one[k].ndim == 0]:
        attrs[str(key)] = one[key].values.item()
        one = one.drop_vars(key)
    attrs.pop("job_sha256", None)
    attrs["database_input"] = attrs["database"]
    attrs["database"] = attrs.pop("database_name", "") or attrs["database"]
    attrs["pressure_Pa"] = attrs.pop("pressure")
    one.attrs = attrs
    return one


def sweep_json(ds) -> dict[str, Any]:
    """``{"cases": [...]}``: per case ``name``, ``status``, ``error`` and the keys of `solubility.solvus`'s JSON
    for its own temperatures (its per-point ``status`` renamed ``point_status``)."""
    from solubility.results.dataset import solvus_json
    from solubility.results.uptake_dataset import uptake_json

    out = []
    for name in ds["case"].values.tolist():
        one = case_dataset(ds, name)
        entry = {"name": name, "status": one.attrs["case_status"], "error": one.attrs["case_error"]}
        if one.attrs["kind"] == "uptake" and one.attrs["case_status"] == "ok":
            line = uptake_json(one.drop_vars([n for n in ("derived", "KS_X", "KS_CM3", "KS_PPM") if n in one
                                              and not np.isfinite(one[n].values).any()]))
        elif "X" in one.data_vars and one.attrs["case_status"] == "ok":
            line = solvus_json(one)
        else:
            n = one.sizes["T"]
            line = {"temperature_K": [float(t) for t in one["T"].values], "mole_fraction": [None] * n,
                    "mass_fraction": [None] * n, "site_fraction": [None] * n, "partner_phases": [[] for _ in range(n)],
                    "converged": [False] * n, "status": [""] * n, "reason": [""] * n, "partner_changes": [],
                    **{k: one.attrs.get(k, "") for k in ("database", "database_sha256", "phase", "solute")}}
        line["point_status"] = line.pop("status")
        out.append({**entry, **line})
    return {"cases": out}


def csv_text(ds) -> str:
    """One row per requested (case, temperature): the case coordinates, T, the per-point variables, MU by component."""
    points = [n for n in ds.data_vars if n != "requested" and ds[n].dims == ("case", "T")]
    mus = [n for n in ds.data_vars if len(ds[n].dims) == 3]
    header = ["case", *INPUT_COORDS, "T", *points]
    for n in mus:
        header += [f"{n}_{c}" for c in ds[ds[n].dims[2]].values.tolist()]
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    columns = {k: ds[k].values for k in ("case", *INPUT_COORDS, "T", *points, *mus)}
    for i in range(ds.sizes["case"]):
        head = [_cell(columns[k][i]) for k in ("case", *INPUT_COORDS)]
        for j in np.flatnonzero(ds["requested"].values[i]):
            row = [*head, _cell(columns["T"][j]), *(_cell(columns[n][i, j]) for n in points)]
            writer.writerow(row + [_cell(v) for n in mus for v in columns[n][i, j]])
    return buffer.getvalue()


def _cell(value: Any) -> str:
    value = value.item() if hasattr(value, "item") else value
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if np.isfinite(value) else ""
    return str(value)


def write_csv(ds, path: str | os.PathLike) -> None:
    """Write `csv_text` of the sweep atomically."""
    atomic_write_text(path, csv_text(ds))


def write_netcdf(ds, path: str | os.PathLike) -> None:
    """Write the sweep Dataset atomically (NetCDF-4, serialized in memory first so a full disk fails cleanly)."""
    data = bytes(ds.to_netcdf(engine="h5netcdf"))
    atomic_write(path, lambda tmp: tmp.write_bytes(data))
