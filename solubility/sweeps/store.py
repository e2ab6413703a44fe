"""The sweep store: a folder where every finished case is written as soon as it completes, read back on resume.

``manifest.json`` holds the job (format, job sha256, every case's name and input sha256; written once, first),
``case-00000.nc`` the Dataset of finished case 0 and ``lock`` the process using the store. A case file is
serialized in memory and written atomically (a full disk is a clean error, a kill leaves no half file), so a
case is finished iff its file exists; a failed case is not stored and runs again on resume. Each file carries
in its attributes the sha256 of its case's inputs and of its own data: on resume a file that was edited, cut
short or belongs to another case is refused (`DamagedStoreError`).
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import re
import socket
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from solubility._io import atomic_write, atomic_write_text
from solubility.errors import OutputError, WriteError
from solubility.sweeps.job import Case, job_sha256

__all__ = ["DamagedStoreError", "Store", "canonical"]

FORMAT, FORMAT_VERSION = "solubility sweep store", 3
MANIFEST, LOCK = "manifest.json", "lock"
#: the largest manifest read back (a case needs about 200 bytes)
MAX_TEXT = 64 * 2**20
#: the attributes of a case file that tie it to its case and its data
CASE_SHA, DATA_SHA = "sweep_case_sha256", "sweep_data_sha256"
_OURS = re.compile(r"^(manifest\.json|lock|case-\d{5,}\.nc|\..*\.part)$")


class DamagedStoreError(OutputError):
    """A store's files do not match what it recorded (edited, truncated or corrupted)."""

    def __init__(self, path: Path, what: str) -> None:
        super().__init__(f"this store is damaged: {what} ({str(path)!r}); rerun without --resume or remove it")


def canonical(ds):
    """A solvus Dataset in the form it has after a NetCDF round trip (text as numpy str, plain attrs)."""
    ds = ds.copy()
    for name in list(ds.variables):
        if ds[name].dtype.kind in "OSU":
            ds[name] = ds[name].astype(str)
    ds.attrs = {k: v.item() if hasattr(v, "item") else v for k, v in ds.attrs.items()}
    return ds


def data_sha256(ds) -> str:
    """SHA-256 of a canonical Dataset's variables (names, dims, values) and attributes but `DATA_SHA`."""
    digest = hashlib.sha256()
    for name in sorted(ds.variables):
        values = ds[name].values
        text = values.tolist() if values.dtype.kind in "OSU" else [str(values.dtype), values.shape]
        digest.update(json.dumps([name, ds[name].dims, text], default=_plain).encode())
        digest.update(b"" if values.dtype.kind in "OSU" else values.tobytes())
    attrs = {k: v for k, v in ds.attrs.items() if k != DATA_SHA}
    return hashlib.sha256(digest.digest() + json.dumps(attrs, sort_keys=True, default=_plain).encode()).hexdigest()


def _plain(value: Any) -> Any:
    """A numpy value (an attribute read back from NetCDF) as JSON takes it."""
    return value.tolist() if hasattr(value, "tolist") else str(value)


class Store:
    """The open, locked store of one job (`Store.open`); `close` releases the lock."""

    def __init__(self, path: Path, cases: list[Case]) -> None:
        self.path, self.cases, self.job, self.locked = path, cases, job_sha256(cases), False

    @classmethod
    def open(cls, path: str | os.PathLike, cases: list[Case], *, resume: bool, overwrite: bool) -> Store:
        """Create or reopen the store of a job, before any case runs, and lock it.

        Raises
        ------
        OutputError
            The folder cannot be made or written; it holds other files; another live sweep holds its lock; it
            holds another job (without `overwrite`) or cases of this job (without `resume` or `overwrite`).
        """
        store = cls(Path(path), cases)
        p = store.path
        if p.exists() and not p.is_dir():
            raise OutputError(f"store {str(p)!r} is a file; give a folder")
        try:
            p.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"store folder {str(p)!r} cannot be created: {exc.strerror or exc}") from None
        others = [e.name for e in p.iterdir() if not _OURS.match(e.name)]
        if others:
            raise OutputError(f"store folder {str(p)!r} holds other files ({others[0]!r}, ...); give a new folder")
        store._lock()
        try:
            store._prepare(resume, overwrite)
        except BaseException:
            store.close()
            raise
        return store

    def _lock(self) -> None:
        lock = self.path / LOCK
        for _ in range(2):
            try:
                fd = os.open(lock, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                owner = lock.read_text(errors="replace").split() if lock.is_file() else []
                if len(owner) == 2 and owner[0].isdigit() and _alive(int(owner[0]), owner[1]):
                    raise OutputError(f"store {str(self.path)!r} is in use by process {owner[0]} on {owner[1]};"
                                      f" wait for it to finish, or remove {str(lock)!r} if it is gone") from None
                with contextlib.suppress(FileNotFoundError):  # a stale lock of a process that died: take it over
                    lock.unlink()
                continue
            except OSError as exc:
                raise OutputError(f"store folder {str(self.path)!r} is not writable: {exc.strerror}") from None
            with os.fdopen(fd, "w") as fh:
                fh.write(f"{os.getpid()} {socket.gethostname()}\n")
            self.locked = True
            return
        raise OutputError(f"store {str(self.path)!r}: another sweep took its lock at the same moment; try again")

    def close(self) -> None:
        """Release the lock and remove temporary files left by an interrupted write."""
        for part in self.path.glob(".*.part"):
            with contextlib.suppress(OSError):
                part.unlink()
        if self.locked:
            with contextlib.suppress(OSError):
                (self.path / LOCK).unlink()
            self.locked = False

    def _prepare(self, resume: bool, overwrite: bool) -> None:
        p = self.path
        try:
            if (p / MANIFEST).exists() and (p / MANIFEST).stat().st_size > MAX_TEXT:
                raise ValueError
            manifest = json.loads((p / MANIFEST).read_text(encoding="utf-8")) if (p / MANIFEST).exists() else None
        except (OSError, ValueError, RecursionError):
            raise DamagedStoreError(p, f"{MANIFEST} cannot be read") from None
        if manifest is not None:
            if not isinstance(manifest, dict) or manifest.get("format") != FORMAT:
                if resume or not overwrite:
                    raise DamagedStoreError(p, f"{MANIFEST} is not the manifest of a sweep store")
            elif manifest.get("job_sha256") != self.job and not overwrite:
                raise OutputError(f"store {str(p)!r} was written by a different job (job sha256 "
                                  f"{str(manifest.get('job_sha256'))[:12]}, this job {self.job[:12]}); use another "
                                  "folder or pass overwrite")
            elif manifest.get("job_sha256") == self.job and resume:
                return
            elif not overwrite and any(p.glob("case-*.nc")):
                raise OutputError(f"store {str(p)!r} already holds cases of this job; pass resume to continue, "
                                  "or overwrite")
        for entry in p.iterdir():  # start afresh: only the store's own files are removed
            if _OURS.match(entry.name) and entry.name != LOCK:
                entry.unlink()
        from solubility import __version__

        atomic_write_text(p / MANIFEST, json.dumps({
            "format": FORMAT, "format_version": FORMAT_VERSION, "job_sha256": self.job,
            "solubility_version": __version__, "created": datetime.now(UTC).isoformat(timespec="seconds"),
            "cases": [{"index": i, "name": c.name, "sha256": c.sha256()} for i, c in enumerate(self.cases)],
        }, indent=1) + "\n")

    def write(self, index: int, ds) -> None:
        """Store the Dataset of finished case `index` atomically, with its case's and its own sha256.

        Raises
        ------
        OutputError
            The file cannot be written (full disk, unwritable folder); the store stays resumable.
        """
        ds = canonical(ds)
        ds.attrs[CASE_SHA] = self.cases[index].sha256()
        ds.attrs[DATA_SHA] = data_sha256(ds)
        data = bytes(ds.to_netcdf(engine="h5netcdf"))  # in memory: a full disk fails cleanly below
        try:
            atomic_write(self.path / f"case-{index:05d}.nc", lambda tmp: tmp.write_bytes(data))
        except OSError as exc:
            raise WriteError(f"{exc}; the store keeps every case finished so far, rerun with resume") from None

    def finished(self) -> dict[int, Any]:
        """The Datasets of the finished cases (those with a file), by index, each checked against its case.

        Raises
        ------
        DamagedStoreError
            A case file cannot be read, was changed, or is not the result of its case.
        """
        import xarray as xr

        done: dict[int, Any] = {}
        for index, case in enumerate(self.cases):
            path = self.path / f"case-{index:05d}.nc"
            if not path.exists():
                continue
            try:
                with xr.open_dataset(path, engine="h5netcdf") as ds:
                    ds = canonical(ds.load())
                ok = ds.attrs.get(CASE_SHA) == case.sha256() and ds.attrs.get(DATA_SHA) == data_sha256(ds)
            except Exception:  # whatever h5py makes of a corrupt file, the answer is the same
                ok = False
            if not ok:
                raise DamagedStoreError(self.path, f"case {case.name!r} (its file is not this case's result)")
            ds.attrs = {k: v for k, v in ds.attrs.items() if k not in (CASE_SHA, DATA_SHA)}
            done[index] = ds
        return done


def _alive(pid: int, host: str) -> bool:
    """True when process `pid` runs (on another host: assume it does)."""
    if host != socket.gethostname():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # alive, owned by another user
        pass
    return True
