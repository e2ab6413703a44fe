"""The open databases shipped with the tool: the index (``databases/index.json``) and the bundled file paths."""

from __future__ import annotations

import json
from pathlib import Path

from solubility.errors import DatabaseError

__all__ = ["bundled_databases", "bundled_dir", "bundled_path"]

_INDEX_FILE = "index.json"


def bundled_dir() -> Path:
    """The folder holding the bundled database files and their index."""
    return Path(__file__).resolve().parent


def bundled_databases() -> list[dict[str, str]]:
    """The open databases shipped with the tool.

    Returns
    -------
    list of dict
        One per database: ``name``, ``file``, ``description``, ``citation``, ``licence``, ``source``,
        ``changes`` and ``sha256`` (of the bundled file), in the order of ``databases/index.json``.
    """
    index = bundled_dir() / _INDEX_FILE
    try:
        entries = json.loads(index.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise DatabaseError(f"the index of bundled databases {str(index)!r} cannot be read: {exc}") from None
    return [dict(e) for e in entries]


def bundled_path(name: str) -> Path | None:
    """Path of the bundled database called `name` (its name or file name, any case), or None."""
    key = name.strip().lower()
    for entry in bundled_databases():
        if entry["name"].lower() == key or entry["file"].lower() == key:
            return bundled_dir() / entry["file"]
    return None
