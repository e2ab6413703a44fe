"""The sweep store: a folder where every finished case is written atomically as soon as it completes.

Layout::

    DIR/manifest.json      which job the store belongs to (sha256 of its normalized cases), written first
    DIR/case-00000.json    one file per finished case, named by its index in the job

A case file holds the case's inputs, its status and message, and its solvus Dataset encoded exactly: every
variable with its dims, dtype, shape, attributes and values (floats as the shortest text that reads back to
the same double, NaN as ``NaN``), so a Dataset read back is the one that was computed, with no optional
dependency (NetCDF would need h5netcdf and h5py).

A case file appears whole or not at all (temporary file, fsync, rename), so a sweep killed at any moment
leaves a store that `sweep(..., resume=True)` continues: finished cases are read back, the others are run.
A case that failed is written too (with its message) and is run again on resume; finished cases never are.
"""

from __future__ import annotations

import contextlib
import json
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from solubility._io import atomic_write_text
from solubility.errors import OutputError
from solubility.sweeps.case import Case, job_sha256

__all__ = ["CaseOutcome", "Store", "decode_dataset", "encode_dataset", "open_store"]

FORMAT = "solubility sweep store"
FORMAT_VERSION = 1
MANIFEST = "manifest.json"
_CASE_FILE = re.compile(r"^case-(\d+)\.json$")
_PART_FILE = re.compile(r"^\.(case-\d+\.json|manifest\.json)\..*\.part$")


@dataclass(frozen=True)
class CaseOutcome:
    """What became of one case.

    Attributes
    ----------
    status
        ``"ok"`` or ``"failed"``.
    error
        One-line message of the failure (``"ExceptionType: message"``), ``""`` when ok.
    data
        The case's solvus Dataset when ok, else None.
    """

    status: str
    error: str = ""
    data: Any = None

    @property
    def ok(self) -> bool:
        return self.status == "ok"


def _case_name(index: int) -> str:
    return f"case-{index:05d}.json"


class Store:
    """An open store for one job (use `open_store`)."""

    def __init__(self, path: Path, cases: list[Case], job: str) -> None:
        self.path = path
        self.cases = cases
        self.job = job

    def write(self, index: int, outcome: CaseOutcome) -> Path:
        """Write the outcome of case `index` atomically.

        Raises
        ------
        OutputError
            The file cannot be written (unwritable folder, full disk); the store stays resumable.
        """
        record = {
            "format": FORMAT,
            "job_sha256": self.job,
            "index": index,
            "case_sha256": self.cases[index].sha256(),
            "case": self.cases[index].to_dict(),
            "status": outcome.status,
            "error": outcome.error,
            "dataset": encode_dataset(outcome.data) if outcome.ok else None,
        }
        text = json.dumps(record, allow_nan=True, separators=(",", ":")) + "\n"
        try:
            return atomic_write_text(self.path / _case_name(index), text)
        except OutputError as exc:
            raise OutputError(
                f"{exc}; the store keeps every case finished so far, rerun with resume"
            ) from None

    def finished(self) -> dict[int, CaseOutcome]:
        """The outcomes of the cases finished with status ok (failed ones are run again)."""
        done: dict[int, CaseOutcome] = {}
        for entry in sorted(os.listdir(self.path)):
            match = _CASE_FILE.match(entry)
            if not match or int(match.group(1)) >= len(self.cases):
                continue
            index = int(match.group(1))
            outcome = self._read(index)
            if outcome is not None and outcome.ok:
                done[index] = outcome
        return done

    def _read(self, index: int) -> CaseOutcome | None:
        try:
            record = json.loads((self.path / _case_name(index)).read_text(encoding="utf-8"))
            expected = (self.job, self.cases[index].sha256())
            if (record.get("job_sha256"), record.get("case_sha256")) != expected:
                return None
            if record["status"] != "ok":
                return CaseOutcome(status=str(record["status"]), error=str(record["error"]))
            return CaseOutcome(status="ok", data=decode_dataset(record["dataset"]))
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None  # not a complete case file of this job: the case runs again


def _plain(value: Any) -> Any:
    """Attribute values as JSON values (numpy scalars and arrays as Python numbers and lists)."""
    if hasattr(value, "tolist") and not isinstance(value, str):
        return value.tolist()
    return value


def _encode_variable(var) -> dict[str, Any]:
    values = np.asarray(var.values)
    dtype = "str" if values.dtype.kind in "OSU" else values.dtype.str
    data = values.astype(str).tolist() if dtype == "str" else values.tolist()
    return {
        "dims": list(var.dims),
        "dtype": dtype,
        "shape": list(values.shape),
        "data": data,
        "attrs": {str(k): _plain(v) for k, v in var.attrs.items()},
    }


def _decode_variable(entry: Mapping[str, Any]) -> tuple:
    dtype = str if entry["dtype"] == "str" else np.dtype(entry["dtype"])
    values = np.array(entry["data"], dtype=dtype).reshape(entry["shape"])
    return tuple(entry["dims"]), values, dict(entry["attrs"])


def encode_dataset(ds) -> dict[str, Any]:
    """A Dataset as JSON-ready values: attrs, and each coordinate and data variable with dims, dtype, shape,
    attrs and values (strings as text, whatever their numpy dtype)."""
    return {
        "attrs": {str(k): _plain(v) for k, v in ds.attrs.items()},
        "coords": {str(k): _encode_variable(v) for k, v in ds.coords.items()},
        "data_vars": {str(k): _encode_variable(v) for k, v in ds.data_vars.items()},
    }


def decode_dataset(data: Mapping[str, Any]):
    """The Dataset of `encode_dataset` (strings come back as numpy unicode arrays)."""
    import xarray as xr

    coords = {k: _decode_variable(v) for k, v in data["coords"].items()}
    data_vars = {k: _decode_variable(v) for k, v in data["data_vars"].items()}
    return xr.Dataset(data_vars, coords=coords, attrs=dict(data["attrs"]))


def _manifest(cases: list[Case], job: str) -> dict[str, Any]:
    from solubility import __version__

    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "job_sha256": job,
        "solubility_version": __version__,
        "created": datetime.now(UTC).isoformat(timespec="seconds"),
        "cases": [{"index": i, "name": c.name, "sha256": c.sha256()} for i, c in enumerate(cases)],
    }


def _read_manifest(path: Path) -> dict[str, Any] | None:
    try:
        data = json.loads((path / MANIFEST).read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None
    except (OSError, ValueError) as exc:
        raise OutputError(
            f"store {str(path)!r}: manifest cannot be read ({exc}); use another folder"
        ) from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise OutputError(f"store {str(path)!r}: {MANIFEST} is not the manifest of a sweep store")
    return data


def _ours(entry: str) -> bool:
    return entry == MANIFEST or bool(_CASE_FILE.match(entry) or _PART_FILE.match(entry))


def _clear(path: Path) -> None:
    """Remove the store's own files (never anything else in the folder)."""
    for entry in os.listdir(path):
        if _ours(entry):
            with contextlib.suppress(FileNotFoundError):
                (path / entry).unlink()


def _remove_partial(path: Path) -> None:
    """Remove temporary files left by a run that was killed while writing."""
    for entry in os.listdir(path):
        if _PART_FILE.match(entry):
            with contextlib.suppress(FileNotFoundError):
                (path / entry).unlink()


def _prepare_folder(path: Path) -> None:
    if path.exists() and not path.is_dir():
        raise OutputError(f"store {str(path)!r} is a file; give a folder")
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"store folder {str(path)!r} cannot be created: {exc.strerror or exc}") from None
    if not os.access(path, os.W_OK | os.X_OK):
        raise OutputError(f"store folder {str(path)!r} is not writable")


def open_store(path: str | os.PathLike, cases: list[Case], *, resume: bool, overwrite: bool) -> Store:
    """Open (or create) the store of a job, before any case runs.

    Parameters
    ----------
    path
        The store folder (created if missing).
    cases
        The job's cases, in order.
    resume
        Continue a store of this same job: its finished cases are kept (even with `overwrite`).
    overwrite
        Start afresh in a folder that holds a store of another job, or of this job when not resuming: the
        store's own files are removed (nothing else in the folder).

    Raises
    ------
    OutputError
        The folder cannot be created or written; it holds other files and no store; it holds a store of a
        different job (and not `overwrite`); it holds finished cases of this job and neither `resume` nor
        `overwrite` was asked.
    """
    p = Path(path)
    _prepare_folder(p)
    job = job_sha256(cases)
    manifest = _read_manifest(p)
    if manifest is None:
        others = [e for e in os.listdir(p) if not _ours(e)]
        if others:
            raise OutputError(f"store folder {str(p)!r} holds other files ({others[0]!r}, ...); give a new folder")
    elif manifest.get("job_sha256") != job and not overwrite:
        raise OutputError(
            f"store {str(p)!r} was written by a different job (job sha256"
            f" {str(manifest.get('job_sha256'))[:12]}, this job {job[:12]});"
            " use another folder or pass overwrite"
        )
    elif manifest.get("job_sha256") != job or (overwrite and not resume):
        manifest = None  # start afresh
    elif not resume and any(_CASE_FILE.match(e) for e in os.listdir(p)):
        raise OutputError(f"store {str(p)!r} already holds cases of this job; pass resume to continue, or overwrite")
    store = Store(p, cases, job)
    _remove_partial(p)
    if manifest is None:
        _clear(p)
        atomic_write_text(p / MANIFEST, json.dumps(_manifest(cases, job), indent=1) + "\n")
    return store
