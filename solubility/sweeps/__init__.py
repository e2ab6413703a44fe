"""Scripted sweeps: many solvus lines from a job file or a list of cases, in parallel, resumable.

A case is one solvus line (database, host phase, solute, temperatures, excluded phases, fixed contents of
other host elements, pressure, name). `sweep` runs a list of cases on local worker processes or on
dask.distributed, writes each finished case to a store folder if asked (so an interrupted run resumes without
losing or repeating work) and returns one `xarray.Dataset` along ``case``. `read_job` reads the cases from a
TOML job file.

The package is called ``sweeps`` so that importing it never hides the function `solubility.sweep` (a
submodule's name is bound on its package when it is imported). ``solubility.sweep``, ``solubility.read_job``
and ``solubility.Case`` are these same objects.

Modules: `case` (the Case type and its validation), `job` (TOML job files), `executors` (where cases run),
`store` (the on-disk store), `assemble` (the sweep Dataset and its JSON, CSV and NetCDF forms), `run`
(`sweep` itself).
"""

from __future__ import annotations

from solubility.sweeps.assemble import case_dataset, csv_text, sweep_json, write_csv, write_netcdf
from solubility.sweeps.case import Case, job_sha256
from solubility.sweeps.job import parse_job, read_job
from solubility.sweeps.run import sweep

__all__ = [
    "Case",
    "case_dataset",
    "csv_text",
    "job_sha256",
    "parse_job",
    "read_job",
    "sweep",
    "sweep_json",
    "write_csv",
    "write_netcdf",
]
