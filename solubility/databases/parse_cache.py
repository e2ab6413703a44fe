"""A cache of parsed databases on disk: a TDB file is parsed once and reused across runs.

Parsing a large TDB file with pycalphad costs seconds (about 15 s of CPU for a 1.2 MB steel database);
unpickling the parsed Database costs a fraction of a second. Entries live in the user's cache folder
(`cache_dir`): ``$SOLUBILITY_CACHE_DIR`` if set, else ``$XDG_CACHE_HOME/solubility``, else
``~/.cache/solubility``.

- Key: the sha256 of the file's bytes, the pycalphad, solubility and Python versions and the cache format. An
  entry made under another version is never read (its name differs), so an upgrade reparses.
- Integrity: each pickle has a sidecar holding its key and an HMAC-SHA256 of the pickle's bytes under a random
  key kept in the cache folder (``key``, mode 0600). The sidecar is checked before unpickling; a missing,
  mismatched, truncated or unreadable entry is reparsed and rewritten. The folder is made 0700 and is used only
  if it and the key file belong to the user and are not writable by others: a pickle runs code when loaded, so
  only a folder nobody else can write to is trusted.
- Writes are atomic (a temporary file renamed); a folder that cannot be written is skipped silently: the
  database is parsed as without a cache.

The text guard (`solubility.databases.guard`) runs on the text before every parse; an entry is written only
after a successful guarded parse.
"""

from __future__ import annotations

import contextlib
import hashlib
import hmac
import json
import os
import pickle
import platform
import secrets
import stat
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

__all__ = ["CACHE_ENV", "cache_dir", "cache_key", "cached_parse", "clear_disk_cache"]

#: environment variable naming the cache folder (tests point it to a temporary folder)
CACHE_ENV = "SOLUBILITY_CACHE_DIR"
#: bump when the pickled content changes shape
_FORMAT = 1
_KEY_FILE = "key"
_SUFFIX = ".pickle"
_SIDECAR = ".json"


def cache_dir() -> Path:
    """The cache folder (not created): ``$SOLUBILITY_CACHE_DIR``, ``$XDG_CACHE_HOME/solubility`` or
    ``~/.cache/solubility``."""
    explicit = os.environ.get(CACHE_ENV, "").strip()
    if explicit:
        return Path(explicit).expanduser()
    xdg = os.environ.get("XDG_CACHE_HOME", "").strip()
    base = Path(xdg).expanduser() if xdg else Path.home() / ".cache"
    return base / "solubility"


def cache_key(digest: str) -> str:
    """The key of a file with sha256 `digest`: its digest and the versions that shape the pickle."""
    from importlib.metadata import version

    from solubility import __version__

    parts = [
        digest,
        f"pycalphad={version('pycalphad')}",
        f"solubility={__version__}",
        f"python={platform.python_version()}",
        f"format={_FORMAT}",
    ]
    return ";".join(parts)


def _entry_name(key: str) -> str:
    return hashlib.sha256(key.encode()).hexdigest()


def _trusted(path: Path) -> bool:
    """Owned by this user and not writable by group or others."""
    try:
        st = path.lstat()
    except OSError:
        return False
    if stat.S_ISLNK(st.st_mode):
        return False
    if hasattr(os, "getuid") and st.st_uid != os.getuid():
        return False
    return not st.st_mode & (stat.S_IWGRP | stat.S_IWOTH)


def _folder(create: bool) -> Path | None:
    folder = cache_dir()
    try:
        if create:
            folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        if not folder.is_dir() or not _trusted(folder):
            return None
    except OSError:
        return None
    return folder


def _secret(folder: Path, create: bool) -> bytes | None:
    path = folder / _KEY_FILE
    try:
        if path.exists():
            if not _trusted(path):
                return None
            data = path.read_bytes()
            return data if len(data) == 32 else None
        if not create:
            return None
        data = secrets.token_bytes(32)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        return data
    except FileExistsError:  # another process made it first
        return _secret(folder, create=False)
    except OSError:
        return None


def _read(key: str) -> Any | None:
    folder = _folder(create=False)
    if folder is None:
        return None
    secret = _secret(folder, create=False)
    if secret is None:
        return None
    name = _entry_name(key)
    try:
        meta = json.loads((folder / (name + _SIDECAR)).read_text(encoding="utf-8"))
        data = (folder / (name + _SUFFIX)).read_bytes()
    except (OSError, ValueError):
        return None
    if not isinstance(meta, dict) or meta.get("key") != key:
        return None
    mac = hmac.new(secret, data, hashlib.sha256).hexdigest()
    if not hmac.compare_digest(mac, str(meta.get("hmac_sha256", ""))):
        return None
    try:
        return pickle.loads(data)
    except Exception:  # a pickle from an incompatible library build: reparse
        return None


def _write_atomic(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _write(key: str, value: Any) -> bytes | None:
    """Store `value`; the pickled bytes, or None when nothing was stored."""
    folder = _folder(create=True)
    if folder is None:
        return None
    secret = _secret(folder, create=True)
    if secret is None:
        return None
    try:
        data = pickle.dumps(value, protocol=pickle.HIGHEST_PROTOCOL)
    except Exception:  # something in the Database cannot be pickled: no cache
        return None
    name = _entry_name(key)
    meta = {"key": key, "hmac_sha256": hmac.new(secret, data, hashlib.sha256).hexdigest()}
    try:
        # pickle first, sidecar last: a reader finds a sidecar only beside a complete pickle
        _write_atomic(folder / (name + _SUFFIX), data)
        _write_atomic(folder / (name + _SIDECAR), json.dumps(meta).encode())
    except OSError:
        return None
    return data


def cached_parse(digest: str, parse: Callable[[], Any]) -> Any:
    """The value `parse()` returns for the file with sha256 `digest`, from the disk cache where possible.

    Parameters
    ----------
    digest
        sha256 of the file's bytes.
    parse
        Guards and parses the text (called only on a miss); its result must pickle.

    Returns
    -------
    object
        The cached value, or a fresh `parse()` (then stored; a cache that cannot be written is skipped).
        A value just stored is returned as read back from its pickle, the form every later run (and every
        worker process of a sweep) gets: symengine rebuilds an expression from its pickle with its terms in
        another internal order than the parser, and compiled energies then differ in the last bits, enough
        to move a converged result by about 1e-12 relative. All processes thus compute with the same form.
    """
    key = cache_key(digest)
    hit = _read(key)
    if hit is not None:
        return hit
    value = parse()
    data = _write(key, value)
    if data is not None:
        try:
            return pickle.loads(data)  # our own bytes, just made
        except Exception:  # pragma: no cover - a value that pickles but does not load back
            return value
    return value


def clear_disk_cache() -> int:
    """Remove every cached entry (the key file stays); returns the number of files removed."""
    folder = _folder(create=False)
    if folder is None:
        return 0
    removed = 0
    for p in folder.iterdir():
        if p.suffix in (_SUFFIX, _SIDECAR) or p.name.endswith(".part"):
            with contextlib.suppress(OSError):
                p.unlink()
                removed += 1
    return removed
