"""The sweep store: a folder where every finished case is written as soon as it completes, read back on resume.

``manifest.json`` holds the job (format, job sha256, every case's name and input sha256; written once, first),
``finished.jsonl`` a line per finished case (index, name, file, the file's sha256: one append, not a rewrite),
``case-00000.nc`` the Dataset of finished case 0 (NetCDF-4, serialized in memory and written atomically, so a
full disk is a clean error and a kill leaves no half file) and ``lock`` the process using the store. A failed
case is not stored: it runs again on resume. On resume every file listed in the journal must have its recorded
sha256 and the case's temperatures, else the store is refused as damaged (`DamagedStoreError`).
"""

from __future__ import annotations

import contextlib
import hashlib
import io
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

FORMAT, FORMAT_VERSION = "solubility sweep store", 2
MANIFEST, JOURNAL, LOCK = "manifest.json", "finished.jsonl", "lock"
#: the largest manifest or journal read back (a case needs about 200 bytes in each)
MAX_TEXT = 64 * 2**20
_OURS = re.compile(r"^(manifest\.json|finished\.jsonl|lock|case-\d{5,}\.nc|\..*\.part)$")


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


def _read_text(store: Path, name: str) -> str:
    """The text of the manifest or the journal; larger than `MAX_TEXT` bytes, the store is damaged."""
    if (store / name).stat().st_size > MAX_TEXT:
        raise DamagedStoreError(store, f"{name} is larger than {MAX_TEXT} bytes")
    return (store / name).read_text(encoding="utf-8", errors="replace")


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
        me = f"{os.getpid()} {socket.gethostname()}\n"
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
                fh.write(me)
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
            manifest = json.loads(_read_text(p, MANIFEST)) if (p / MANIFEST).exists() else None
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
            elif not overwrite and (p / JOURNAL).exists():
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
        """Store the Dataset of finished case `index`: its file atomically, then its line in the journal.

        Raises
        ------
        OutputError
            The file cannot be written (full disk, unwritable folder); the store stays resumable.
        """
        data = bytes(canonical(ds).to_netcdf(engine="h5netcdf"))  # in memory: a full disk fails cleanly below
        name = f"case-{index:05d}.nc"
        line = json.dumps({"index": index, "name": self.cases[index].name, "file": name,
                           "sha256": hashlib.sha256(data).hexdigest()}) + "\n"
        try:
            atomic_write(self.path / name, lambda tmp: tmp.write_bytes(data))
            with open(self.path / JOURNAL, "a", encoding="utf-8") as fh:
                fh.write(line)
                fh.flush()
                os.fsync(fh.fileno())
        except OSError as exc:
            raise WriteError(f"{exc}; the store keeps every case finished so far, rerun with resume") from None

    def finished(self) -> dict[int, Any]:
        """The Datasets of the finished cases, by index, each checked against the journal and its case.

        Raises
        ------
        DamagedStoreError
            The journal cannot be read, or a case file listed in it was changed or is not the case's result.
        """
        import xarray as xr

        if not (self.path / JOURNAL).exists():
            return {}
        lines = _read_text(self.path, JOURNAL).split("\n")[:-1]  # what follows the last newline: an append cut short
        done: dict[int, Any] = {}
        for number, text in enumerate(lines, start=1):
            if not text.strip():
                continue
            try:
                entry = json.loads(text)
                index, name, digest = int(entry["index"]), entry["name"], entry["sha256"]
                case = self.cases[index]
                if case.name != name or entry["file"] != f"case-{index:05d}.nc":
                    raise ValueError
            except (ValueError, KeyError, TypeError, IndexError, RecursionError):
                raise DamagedStoreError(self.path, f"{JOURNAL} line {number}") from None
            where = f"case {name!r}"
            try:
                data = (self.path / entry["file"]).read_bytes()
            except FileNotFoundError:
                continue  # the file was removed: the case runs again
            if hashlib.sha256(data).hexdigest() != digest:
                raise DamagedStoreError(self.path, f"{where} (its file does not match its sha256)")
            try:
                with xr.open_dataset(io.BytesIO(data), engine="h5netcdf") as ds:
                    ds = canonical(ds.load())
                ok = [round(float(t), 6) for t in ds["T"].values] == list(case.temperatures)
            except Exception:  # whatever h5py makes of a corrupt file, the answer is the same
                ok = False
            if not ok:
                raise DamagedStoreError(self.path, f"{where} (its file is not this case's result)")
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
