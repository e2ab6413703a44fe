"""Atomic file output: a result is either written whole or not at all, and a command's outputs all or none.

* `check_outputs` (and `check_output_path` for one file) resolves every output to its real path BEFORE any
  work and refuses, with one line, an output that is one of the command's inputs, two outputs that are one
  file, a folder or a name ending in ``/``, a device node, pipe or socket, an existing file or a dangling
  symbolic link without ``overwrite``, a name too long to leave room for the temporary file, and a missing or
  unwritable folder.
* `atomic_write` writes one file through a temporary file beside it and a rename.
* `atomic_outputs` writes several files to temporaries and renames them together at the end; on an exception,
  Ctrl-C (KeyboardInterrupt) or SIGTERM the temporaries are removed and no output is changed.
"""

from __future__ import annotations

import collections
import contextlib
import os
import signal
import tempfile
import threading
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import Any

from solubility.errors import OutputError, Terminated, WriteError

__all__ = [
    "OutputSet",
    "atomic_outputs",
    "atomic_write",
    "atomic_write_text",
    "check_output_path",
    "check_outputs",
    "written_outputs",
]

#: how many outputs this process has renamed into place, and the last few (for the message of an interruption)
_WRITTEN: dict[str, Any] = {"count": 0, "last": collections.deque(maxlen=8)}

#: temporary file names: "." + name + "." + 8 random characters (mkstemp) + ".part"
_TMP_EXTRA = len("..") + 8 + len(".part")


def written_outputs() -> tuple[int, list[Path]]:
    """How many output files this process has written whole (renamed into place) so far, and the last few."""
    return _WRITTEN["count"], list(_WRITTEN["last"])


def _record(path: Path) -> None:
    _WRITTEN["count"] += 1
    _WRITTEN["last"].append(path)


def _name_max(folder: Path) -> int:
    try:
        return int(os.pathconf(folder, "PC_NAME_MAX"))
    except (OSError, ValueError, AttributeError):  # pathconf missing (Windows) or not answered
        return 255


def _real(path: Path) -> Path:
    """The real path of `path` (symbolic links followed as far as they go; a missing file is fine)."""
    return Path(os.path.realpath(path))


def check_outputs(
    paths: Iterable[str | os.PathLike],
    inputs: Iterable[str | os.PathLike | None] = (),
    *,
    overwrite: bool = False,
) -> list[Path]:
    """Check, before any work, that every output of a command can be written and destroys nothing.

    Parameters
    ----------
    paths
        The output files, as the user gave them.
    inputs
        The files the command reads (None and names that are not existing files are skipped).
    overwrite
        Accept existing regular files (each is replaced atomically once its new version is complete).

    Returns
    -------
    list of Path
        The real paths to write, in the order given (a symbolic link to a file is written through: the link
        stays and its target is replaced).

    Raises
    ------
    OutputError
        One line naming the output and what is wrong with it.
    """
    given = [os.fspath(p) for p in paths]
    real_inputs: dict[Path, str] = {}
    for item in inputs:
        if item is None:
            continue
        with contextlib.suppress(OSError, ValueError):
            if Path(item).exists():
                real_inputs.setdefault(_real(Path(item)), os.fspath(item))
    out: list[Path] = []
    seen: dict[Path, str] = {}
    for text in given:
        real = _check_one(text, overwrite)
        if real in real_inputs:
            raise OutputError(
                f"output file {text!r} is the input {real_inputs[real]!r} of this command; give another name"
            )
        if real in seen:
            raise OutputError(f"outputs {seen[real]!r} and {text!r} are one file; give different names")
        seen[real] = text
        out.append(real)
    return out


def _check_one(text: str, overwrite: bool) -> Path:
    if not text or "\x00" in text:
        raise OutputError(f"output file name {text!r} is not accepted; give a file name")
    if text.endswith(("/", os.sep)) or (os.altsep and text.endswith(os.altsep)):
        raise OutputError(f"output path {text!r} names a folder; give a file name")
    p = Path(text)
    try:
        is_link = p.is_symlink()
        exists = p.exists()  # follows links: False for a dangling one
    except OSError as exc:  # e.g. a name too long for the system
        raise OutputError(f"output file {text[:200]!r} cannot be used: {exc.strerror or exc}") from None
    if is_link and not exists and not overwrite:
        raise OutputError(
            f"output file {text!r} is a symbolic link to a missing file; remove it or pass --overwrite"
        )
    real = _real(p)
    if real.is_dir():
        raise OutputError(f"output path {text!r} is a folder; give a file name")
    if exists and not real.is_file():
        raise OutputError(f"output path {text!r} is not a regular file (a device, pipe or socket); give a file name")
    if exists and not overwrite:
        raise OutputError(f"output file {text!r} exists already; remove it or pass --overwrite")
    parent = real.parent
    if parent.exists() and not parent.is_dir():
        raise OutputError(f"{str(parent)!r}, the folder of output file {text!r}, is a file, not a folder")
    if not parent.is_dir():
        raise OutputError(f"folder {str(p.parent)!r} of output file {text!r} does not exist")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise OutputError(f"folder {str(p.parent)!r} of output file {text!r} is not writable")
    limit = _name_max(parent)
    size = len(os.fsencode(real.name))
    if size + _TMP_EXTRA > limit:
        raise OutputError(
            f"output file name {real.name[:40]!r}... is {size} bytes; at most {limit - _TMP_EXTRA} are accepted "
            "(room is kept for the temporary file written first)"
        )
    return real


def check_output_path(
    path: str | os.PathLike, *, overwrite: bool = False, inputs: Iterable[str | os.PathLike | None] = ()
) -> Path:
    """Check one output file before any work starts (see `check_outputs`); returns its real path."""
    return check_outputs([path], inputs, overwrite=overwrite)[0]


def _temporary(p: Path) -> Path:
    """An empty temporary file beside `p` with the usual permissions of a new file."""
    folder = p.parent if str(p.parent) else Path(".")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=folder)
    except OSError as exc:  # the folder went away or became unwritable after the checks
        raise WriteError(f"could not write {str(p)!r}: {exc.strerror or exc}") from None
    os.close(fd)
    tmp = Path(tmp_name)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes 0600; a result file gets the usual permissions
    return tmp


def _fill(tmp: Path, p: Path, write: Callable[[Path], None]) -> None:
    """Run `write(tmp)` and flush the file to disk; on any failure remove `tmp`."""
    try:
        write(tmp)
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise WriteError(f"could not write {str(p)!r}: {exc.strerror or exc}") from exc
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


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
    tmp = _temporary(p)
    _fill(tmp, p, write)
    try:
        os.replace(tmp, p)
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise WriteError(f"could not write {str(p)!r}: {exc.strerror or exc}") from exc
    _record(p)
    return p


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write `text` (UTF-8) to `path` atomically."""
    return atomic_write(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))


class OutputSet:
    """The outputs of one command, written to temporaries now and renamed together by `atomic_outputs`."""

    def __init__(self) -> None:
        self._pending: list[tuple[Path, Path]] = []  # (temporary, final)

    def write(self, path: str | os.PathLike, write: Callable[[Path], None]) -> Path:
        """Fill a temporary file for `path` with `write(tmp)`; the rename waits for the end of the block."""
        p = Path(path)
        if any(final == p for _, final in self._pending):
            raise OutputError(f"output {str(p)!r} is written twice in one command")
        tmp = _temporary(p)
        self._pending.append((tmp, p))  # recorded first: removed whatever happens next
        _fill(tmp, p, write)
        return p

    def write_text(self, path: str | os.PathLike, text: str) -> Path:
        """`write` for UTF-8 text."""
        return self.write(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))

    @property
    def temporaries(self) -> list[Path]:
        """The temporary files not yet renamed."""
        return [tmp for tmp, _ in self._pending]

    def _commit(self) -> None:
        done = 0
        try:
            for tmp, final in self._pending:
                os.replace(tmp, final)
                _record(final)
                done += 1
        except OSError as exc:
            raise WriteError(
                f"could not write {str(self._pending[done][1])!r}: {exc.strerror or exc}"
                + (f" ({done} of {len(self._pending)} outputs were written)" if done else "")
            ) from exc
        finally:
            self._pending = self._pending[done:]

    def _discard(self) -> None:
        for tmp, _ in self._pending:
            with contextlib.suppress(OSError):
                tmp.unlink()
        self._pending = []


@contextlib.contextmanager
def atomic_outputs() -> Iterator[OutputSet]:
    """Write several outputs all or none.

    Inside the block, ``outputs.write(path, write)`` fills a temporary file beside each output; when the block
    ends normally every temporary is renamed onto its output, one after the other with SIGINT and SIGTERM held
    back. On an exception, KeyboardInterrupt or SIGTERM (turned into `solubility.errors.Terminated`, a
    KeyboardInterrupt, while the block runs in the main thread) the temporaries are removed and no output is
    created or changed.

    Examples
    --------
    >>> with atomic_outputs() as outputs:  # doctest: +SKIP
    ...     outputs.write_text("a.csv", csv_text)
    ...     outputs.write("a.nc", lambda tmp: ds.to_netcdf(tmp))
    """
    outputs = OutputSet()
    state = {"committed": False}

    def terminated(signum: int, frame: Any) -> None:
        done = "every output was written" if state["committed"] else "no output was written"
        raise Terminated(f"terminated (SIGTERM); {done}")

    main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGTERM, terminated) if main else None
    try:
        yield outputs
        if main:
            held = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM})
            try:
                outputs._commit()
                state["committed"] = True
            finally:
                signal.pthread_sigmask(signal.SIG_SETMASK, held)
        else:
            outputs._commit()
    finally:
        outputs._discard()
        if main:
            signal.signal(signal.SIGTERM, previous if previous is not None else signal.SIG_DFL)
