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

#: solvus attributes that are inputs (coordinates already) or the sweep's own
_DROPPED = {"created", "title", "phase", "solute", "pressure_Pa", "fix", "balance", "exclude"}
INPUT_COORDS = ("database", "phase", "solute", "pressure", "fix", "exclude", "balance", "case_status", "case_error",
                "kind")


def _fill(dtype: np.dtype) -> Any:
    return {"f": np.nan, "c": complex(np.nan, np.nan), "b": False, "i": -1, "u": 0}.get(dtype.kind, "")


def _is_global(key: str) -> bool:
    return key.endswith("_version") or key == "caution"


def assemble(cases: Sequence[Case], results: Mapping[int, Any], errors: Mapping[int, str]):
    """The sweep Dataset of the finished cases' Datasets (index -> Dataset) and the failed ones' messages."""
    import xarray as xr

    order = sorted(results)
    parts = []
    for i in order:
        ds = canonical(results[i]).drop_vars("T_C", errors="ignore")
        for dim in ("change", "field_end"):
            if dim in ds.dims:
                ds = ds.assign_coords({dim: np.arange(ds.sizes[dim])})
        parts.append(ds.assign_coords(case=cases[i].name).expand_dims("case"))
    T = np.unique(np.concatenate([np.asarray(c.temperatures, dtype=float) for c in cases]))
    names = [c.name for c in cases]
    if parts:
        fills = {n: _fill(v.dtype) for p in parts for n, v in p.data_vars.items()}
        ds = xr.concat(parts, dim="case", join="outer", fill_value=fills, combine_attrs="drop_conflicts",
                       coords="minimal", data_vars="all")
        ds = ds.reindex(case=names, T=T, fill_value=fills).drop_vars(["change", "field_end"], errors="ignore")
        ds.attrs = {k: v for k, v in results[order[0]].attrs.items() if _is_global(k)}
        ds["T"].attrs = dict(results[order[0]]["T"].attrs)
    else:
        ds = xr.Dataset(coords={"case": names, "T": ("T", T, {"units": "K", "long_name": "temperature"})})
    ds["case"] = ("case", np.array(names, dtype=str), {"long_name": "case"})
    requested = np.zeros((len(cases), T.size), dtype=bool)
    for i, case in enumerate(cases):
        requested[i, np.searchsorted(T, case.temperatures)] = True
    ds["requested"] = (("case", "T"), requested,
                       {"long_name": "temperature asked for by the case (False: padding of the union of grids)"})
    ds = ds.assign_coords(T_C=("T", T - ZERO_CELSIUS, {"units": "degC", "long_name": "temperature"}))
    ds = ds.assign_coords(_case_coords(cases, results, errors))
    kinds = " and ".join(sorted({c.kind for c in cases}))
    ds.attrs.update(title=f"sweep of {len(cases)} {kinds} cases", job_sha256=job_sha256(list(cases)),
                    created=datetime.now(UTC).isoformat(timespec="seconds"))
    return ds


def _case_coords(cases: Sequence[Case], results: Mapping[int, Any], errors: Mapping[int, str]) -> dict[str, Any]:
    def text(values, long_name):
        return ("case", np.array(list(values), dtype=str), {"long_name": long_name})

    n, ok = len(cases), [i in results for i in range(len(cases))]
    out = {
        "database": text((c.database for c in cases), "database (path or bundled name)"),
        "phase": text((c.phase for c in cases), "host phase"),
        "solute": text((c.solute for c in cases), "solute element"),
        "pressure": ("case", np.array([c.pressure for c in cases]), {"units": "Pa", "long_name": "pressure"}),
        "fix": text((json.dumps(c.fix_dict, sort_keys=True) for c in cases), "fixed u-fractions (JSON)"),
        "exclude": text((",".join(c.exclude) for c in cases), "excluded phases"),
        "balance": text((str(results[i].attrs.get("balance", "")) if ok[i] else (c.balance or "")
                         for i, c in enumerate(cases)), "balance element"),
        "kind": text((c.kind for c in cases), "case kind: solvus or uptake (`solubility.uptake`)"),
        "case_status": text(("ok" if k else "failed" for k in ok), "case status: ok or failed"),
        "case_error": text(("" if ok[i] else errors.get(i, "not run") for i in range(n)), "error of a failed case"),
    }
    keys = list(dict.fromkeys(k for i in sorted(results) for k in results[i].attrs
                              if k not in _DROPPED and not _is_global(k)))
    for key in keys:
        values = [results[i].attrs.get(key) if i in results else None for i in range(n)]
        present = [v for v in values if v is not None]
        if present and all(isinstance(v, int | float | np.number) and not isinstance(v, bool) for v in present):
            column = np.array([np.nan if v is None else float(v) for v in values])
        else:
            column = np.array(["" if v is None else v if isinstance(v, str) else json.dumps(np.asarray(v).tolist())
                               for v in values], dtype=str)
        out["database_name" if key == "database" else key] = ("case", column)
    return out


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
