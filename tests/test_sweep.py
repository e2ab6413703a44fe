"""`solubility.sweep` on the bundled Fe-C database (Hallstedt et al., Calphad 34 (2010) 129): real solvus.

Checks, each against something outside the sweep code:
- every case of a sweep equals `solubility.solvus` called directly on the same inputs (the engine itself);
- the cases are not mixed up: in one sweep, the solubility of C in ferrite and in austenite against cementite
  (graphite excluded, metastable) is above the one against graphite at every temperature, as it must be for
  any metastable partner (common practice, no source: a metastable phase has the higher chemical potential of
  the solute, so the host holds more of it before the phase can form);
- a local process pool, dask.distributed (a LocalCluster) and a run in this process give identical Datasets
  (xarray.testing.assert_identical, the creation time aside), and so does a run resumed from a store;
- a case that fails is recorded with its message and NaN, and the others go on.
Temperature grids are a few points each, so the whole module runs in well under a minute on 2 cores.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from solubility.api import solvus
from solubility.errors import InputError, JobError, OutputError
from solubility.sweeps import Case, case_dataset, sweep, sweep_json

METASTABLE = ["DIAMOND_A4", "GRAPHITE"]
NOT_BCC = ["CEMENTITE_D011", "DIAMOND_A4", "FCC_A1", "GRAPHITE", "HCP_A3", "LIQUID", "M7C3_D101"]

CASES = [
    Case(name="ferrite", database="fe-c", phase="BCC_A2", solute="C", temperatures="850:950:50"),
    Case(name="austenite", database="fe-c", phase="FCC_A1", solute="C", temperatures="1200:1300:50"),
    Case(name="ferrite-cementite", database="fe-c", phase="BCC_A2", solute="C", temperatures="850:950:50",
         exclude=METASTABLE),
    # a grid of its own: the union T has points that other cases pad with NaN
    Case(name="austenite-cementite", database="fe-c", phase="FCC_A1", solute="C",
         temperatures=[1250, 1300, 1325], exclude=METASTABLE),
    # every partner excluded: the job passes the checks made before any work, and the solvus then refuses
    # the case (a real failure, not an injected one)
    Case(name="no-partner", database="fe-c", phase="BCC_A2", solute="C", temperatures=[1000],
         exclude=NOT_BCC),
]


def _without_created(ds: xr.Dataset) -> xr.Dataset:
    ds = ds.copy()
    ds.attrs.pop("created")
    return ds


def assert_same_sweep(a: xr.Dataset, b: xr.Dataset) -> None:
    """Identical values, coordinates and attributes (not the creation time), and identical dtypes."""
    xr.testing.assert_identical(_without_created(a), _without_created(b))
    for name in a.variables:
        assert a[name].dtype == b[name].dtype, name


@pytest.fixture(scope="module")
def serial() -> xr.Dataset:
    return sweep(CASES, workers=0)


def test_layout(serial):
    assert serial["case"].values.tolist() == [c.name for c in CASES]
    assert serial["T"].values.tolist() == [850, 900, 950, 1000, 1200, 1250, 1300, 1325]  # the union, sorted
    assert serial["T"].attrs["units"] == "K"
    asked = serial["requested"].sel(case="austenite-cementite").values
    assert asked.tolist() == [False, False, False, False, False, True, True, True]
    padded = serial["X"].sel(case="austenite-cementite").values[~asked]
    assert np.isnan(padded).all()
    assert serial["phase"].values.tolist() == ["BCC_A2", "FCC_A1", "BCC_A2", "FCC_A1", "BCC_A2"]
    assert serial["exclude"].values.tolist()[2] == "DIAMOND_A4,GRAPHITE"
    assert json.loads(serial["fix"].values[0]) == {}
    assert serial["pressure"].attrs["units"] == "Pa"
    assert set(serial["X"].dims) == {"case", "T"} and serial["MU"].dims == ("case", "T", "component")


def test_every_case_equals_the_solvus_called_directly(serial):
    for case in CASES[:4]:
        direct = solvus(case.database, case.phase, case.solute, list(case.temperatures),
                                   exclude=case.exclude, fix=case.solvus_fix, pressure=case.pressure)
        one = case_dataset(serial, case.name)
        for name in ("X", "W", "PPM", "Y", "MU", "partner", "status", "converged", "reason",
                     "partner_change_T"):
            # bit for bit: the same engine on the same inputs (strings compared as text)
            np.testing.assert_array_equal(one[name].values.astype(direct[name].dtype), direct[name].values,
                                          err_msg=f"{case.name}: {name}")
        assert one.attrs["database_sha256"] == direct.attrs["database_sha256"]
        assert one.attrs["site_ratios"] == direct.attrs["site_ratios"]


def test_metastable_partner_gives_the_higher_solubility(serial):
    # common practice, no source: see the module docstring
    for stable, metastable in [("ferrite", "ferrite-cementite"), ("austenite", "austenite-cementite")]:
        both = serial["requested"].sel(case=stable).values & serial["requested"].sel(case=metastable).values
        assert both.sum() >= 2
        w_stable = serial["W"].sel(case=stable).values[both]
        w_meta = serial["W"].sel(case=metastable).values[both]
        assert np.all(w_meta > w_stable), (stable, w_stable, w_meta)
        assert set(serial["partner"].sel(case=metastable).values[both]) == {"CEMENTITE_D011"}
        assert set(serial["partner"].sel(case=stable).values[both]) == {"GRAPHITE"}


def test_a_failed_case_is_recorded_and_the_others_go_on(serial):
    status = dict(zip(serial["case"].values.tolist(), serial["case_status"].values.tolist(), strict=True))
    assert status == {"ferrite": "ok", "austenite": "ok", "ferrite-cementite": "ok",
                      "austenite-cementite": "ok", "no-partner": "failed"}
    error = str(serial["case_error"].sel(case="no-partner").values)
    assert error.startswith("InputError: ") and "no candidate partner" in error and "\n" not in error
    failed = serial.sel(case="no-partner")
    assert bool(failed["requested"].sel(T=1000)) and np.isnan(failed["X"].values).all()
    assert not failed["converged"].values.any()


def test_strict_raises_the_error_of_the_case_by_name():
    with pytest.raises(InputError, match=r"^case 'no-partner': .*no candidate partner"):
        sweep(CASES[-1:], workers=0, strict=True)


def test_json_of_a_sweep(serial):
    data = sweep_json(serial)
    assert [c["name"] for c in data["cases"]] == [c.name for c in CASES]
    first = data["cases"][0]
    for key in ("name", "status", "error", "temperature_K", "mole_fraction", "mass_fraction", "site_fraction",
                "partner_phases", "converged"):
        assert key in first
    assert first["temperature_K"] == [850.0, 900.0, 950.0]  # the case's own points, no padding
    assert first["partner_phases"] == [["GRAPHITE"]] * 3
    failed = data["cases"][-1]
    assert failed["status"] == "failed" and failed["mole_fraction"] == [None]
    assert failed["error"].startswith("InputError")


def test_local_pool_gives_the_same_dataset(serial):
    # two workers, and the cases of the two systems (with and without graphite) interleaved
    assert_same_sweep(sweep(CASES, workers=2), serial)


def test_dask_local_cluster_gives_the_same_dataset(serial):
    import distributed  # in the test extra: a missing install fails here rather than skipping
    # threads in this process: the cheapest cluster that still goes through the client and scheduler
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=":0") as cluster:
        assert_same_sweep(sweep(CASES, scheduler=cluster), serial)
        assert_same_sweep(sweep(CASES, scheduler=cluster.scheduler_address), serial)


def test_store_and_resume(serial, tmp_path):
    store = tmp_path / "store"
    full = sweep(CASES, workers=0, store=store)
    assert_same_sweep(full, serial)
    files = sorted(p.name for p in store.iterdir())
    # the failed case (4) is not stored: it runs again on resume
    assert files == ["case-00000.nc", "case-00001.nc", "case-00002.nc", "case-00003.nc", "manifest.json"]
    # a run that stopped after some cases: remove two case files, leave a half-written temporary file
    (store / "case-00001.nc").unlink()
    (store / "case-00003.nc").unlink()
    (store / ".case-00003.nc.x1y2.part").write_bytes(b"\x89HDF\r\n")
    kept = {p.name: p.stat().st_mtime_ns for p in store.glob("case-*.nc")}
    calls = []
    resumed = sweep(CASES, workers=0, store=store, resume=True,
                    progress=lambda done, total, case, status: calls.append((done, case and case.name)))
    assert_same_sweep(resumed, serial)
    # the finished ok cases were read back, not run again; the failed one was run again
    assert calls == [(2, None), (3, "austenite"), (4, "austenite-cementite"), (5, "no-partner")]
    assert all((store / n).stat().st_mtime_ns == t for n, t in kept.items())
    assert not list(store.glob(".*.part")) and not (store / "lock").exists()


def test_store_of_another_job_is_refused_unless_overwrite(tmp_path):
    store = tmp_path / "store"
    sweep(CASES[:1], workers=0, store=store)
    with pytest.raises(OutputError, match="written by a different job"):
        sweep(CASES[:2], workers=0, store=store, resume=True)
    with pytest.raises(OutputError, match="already holds cases of this job; pass resume"):
        sweep(CASES[:1], workers=0, store=store)
    again = sweep(CASES[1:2], workers=0, store=store, overwrite=True)
    assert again["case"].values.tolist() == ["austenite"]
    assert sorted(p.name for p in store.iterdir()) == ["case-00000.nc", "manifest.json"]
    manifest = json.loads((store / "manifest.json").read_text())
    assert [c["name"] for c in manifest["cases"]] == ["austenite"]


def test_store_folder_problems_are_one_line_output_errors(tmp_path):
    other = tmp_path / "notes"
    other.mkdir()
    (other / "thesis.txt").write_text("not a store")
    with pytest.raises(OutputError, match="holds other files"):
        sweep(CASES[:1], workers=0, store=other)
    assert sorted(os.listdir(other)) == ["thesis.txt"]  # nothing written there
    blocker = tmp_path / "file"
    blocker.write_text("")
    with pytest.raises(OutputError, match="cannot be created"):
        sweep(CASES[:1], workers=0, store=blocker / "store")
    with pytest.raises(OutputError, match="is a file"):
        sweep(CASES[:1], workers=0, store=blocker)


def test_inputs_are_checked_before_any_work(tmp_path):
    bad = [CASES[0], Case(name="typo", database="fe-c", phase="BCC_A3", solute="C", temperatures=[900])]
    with pytest.raises(JobError, match=r"case 'typo': key 'phase': phase 'BCC_A3' is not in database"):
        sweep(bad, workers=0, store=tmp_path / "s")
    assert not (tmp_path / "s").exists()
    with pytest.raises(JobError, match=r"case 'x': key 'database': .*neither"):
        missing = str(tmp_path / "no.tdb")
        sweep([Case(name="x", database=missing, phase="BCC_A2", solute="C", temperatures=[900])])
    with pytest.raises(JobError, match=r"case 'x': key 'solute': element 'N' is not in database"):
        sweep([Case(name="x", database="fe-c", phase="BCC_A2", solute="N", temperatures=[900])])
    with pytest.raises(JobError, match=r"case 2 \('ferrite'\): key 'name': 'ferrite' is already the name"):
        sweep([CASES[0], CASES[0]])
    with pytest.raises(JobError, match=r"case 1: key 'solute' is missing"):
        sweep([{"name": "m", "database": "fe-c", "phase": "BCC_A2", "temperatures": [900]}])
    with pytest.raises(InputError, match="workers or scheduler, not both"):
        sweep(CASES[:1], workers=2, scheduler="tcp://127.0.0.1:1")
    with pytest.raises(InputError, match="workers must be a whole number"):
        sweep(CASES[:1], workers=-1)
    with pytest.raises(InputError, match="resume needs a store"):
        sweep(CASES[:1], resume=True)


def test_cases_may_be_given_as_mappings(serial):
    mapped = sweep([{"name": "ferrite", "database": "fe-c", "phase": "BCC_A2", "solute": "C",
                     "temperatures": "850:950:50"}], workers=0)
    np.testing.assert_array_equal(mapped["X"].values[0], serial["X"].sel(case="ferrite").values[:3])


def test_sweep_dataset_round_trips_through_netcdf(serial, tmp_path):
    from solubility.sweeps import write_netcdf

    path = tmp_path / "sweep.nc"
    write_netcdf(serial, path)
    with xr.open_dataset(path, engine="h5netcdf") as back:
        back = back.load()
    for name in serial.variables:
        if serial[name].dtype.kind == "U":
            np.testing.assert_array_equal(back[name].values.astype(str), serial[name].values)
        else:
            np.testing.assert_array_equal(back[name].values, serial[name].values)
    assert Path(path).stat().st_size > 0
