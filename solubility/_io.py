"""Atomic file output: a result is either written whole or not at all."""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from solubility.errors import OutputError

__all__ = ["atomic_write", "check_output_path"]


def check_output_path(path: str | os.PathLike, *, overwrite: bool = False) -> Path:
    """Check that `path` can be written before any work starts.

    Parameters
    ----------
    path
        The output file.
    overwrite
        Accept an existing file (it is replaced atomically once the new one is complete).

    Raises
    ------
    OutputError
        The file exists (and `overwrite` is false), names a folder, or its folder is missing or unwritable.
    """
    p = Path(path)
    if p.is_dir():
        raise OutputError(f"output path {str(p)!r} is a folder; give a file name")
    if p.exists() and not overwrite:
        raise OutputError(f"output file {str(p)!r} exists already; remove it or pass --overwrite")
    parent = p.parent if str(p.parent) else Path(".")
    if parent.exists() and not parent.is_dir():
        raise OutputError(f"{str(parent)!r}, the folder of output file {str(p)!r}, is a file, not a folder")
    if not parent.is_dir():
        raise OutputError(f"folder {str(parent)!r} of output file {str(p)!r} does not exist")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise OutputError(f"folder {str(parent)!r} of output file {str(p)!r} is not writable")
    return p


def atomic_write(path: str | os.PathLike, write: Callable[[Path], None]) -> Path:
    """Write a file atomically: `write(tmp)` fills a temporary file beside `path`, which is then renamed.

    On any error the temporary file is removed and `path` is left as it was.

    Parameters
    ----------
    path
        Final file name.
    write
        Called with the temporary path; must create the file there.

    Returns
    -------
    Path
        The final path.
    """
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=folder)
    except OSError as exc:  # the folder went away or became unwritable after check_output_path
        raise OutputError(f"could not write {str(p)!r}: {exc.strerror or exc}") from None
    os.close(fd)
    tmp = Path(tmp_name)
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes 0600; a result file gets the usual permissions
        write(tmp)
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise OutputError(f"could not write {str(p)!r}: {exc.strerror or exc}") from exc
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise
    return p


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write `text` (UTF-8) to `path` atomically."""
    return atomic_write(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))
