"""Scripted sweeps: many solvus lines from a job file or a list of cases, in parallel, resumable.

`read_job` reads and checks a TOML job file (`job`); `sweep` runs the cases in this process, on a local
process pool or on dask.distributed (`run`), writes each finished case to a store folder if asked (`store`),
and returns one `xarray.Dataset` along ``case`` (`assemble`). The package is called ``sweeps`` so that
importing it never hides the function `solubility.sweep`.
"""

from __future__ import annotations

from solubility.sweeps.assemble import case_dataset, csv_text, sweep_json, write_csv, write_netcdf
from solubility.sweeps.job import MAX_CASES, Case, job_sha256, parse_job, read_job
from solubility.sweeps.run import sweep
from solubility.sweeps.store import DamagedStoreError

__all__ = ["MAX_CASES", "Case", "DamagedStoreError", "case_dataset", "csv_text", "job_sha256", "parse_job", "read_job",
           "sweep", "sweep_json", "write_csv", "write_netcdf"]
