"""A usable matplotlib config folder, set before anything imports matplotlib (pycalphad does, on import).

Imports nothing heavy, so the command line can call it first.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["ensure_config_dir"]


def _writable(folder: Path) -> bool:
    probe = folder if folder.exists() else next((p for p in folder.parents if p.exists()), None)
    return probe is not None and probe.is_dir() and os.access(probe, os.W_OK | os.X_OK)


def ensure_config_dir() -> None:
    """Point ``MPLCONFIGDIR`` at a fresh temporary folder when matplotlib's default one cannot be written.

    Matplotlib's default is ``$XDG_CONFIG_HOME/matplotlib`` or ``~/.config/matplotlib``; with an unwritable or
    missing HOME (a service account, a container) it warns on every start and, with an unwritable working
    folder too, can fail. An explicit ``MPLCONFIGDIR`` is left alone.
    """
    if os.environ.get("MPLCONFIGDIR"):
        return
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    if not _writable(Path(base) / "matplotlib"):
        os.environ["MPLCONFIGDIR"] = tempfile.mkdtemp(prefix="solubility-matplotlib-")
