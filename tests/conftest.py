"""Shared fixtures. Databases are loaded once per session and never mutated by tests."""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

import pytest


@pytest.fixture(scope="session")
def pycalphad_db_dir() -> Path:
    """Folder of the open test databases shipped inside the installed pycalphad package (MIT licence)."""
    return Path(str(files("pycalphad.tests.databases")))


@pytest.fixture(scope="session")
def cfe_tdb_path(pycalphad_db_dir: Path) -> Path:
    """pycalphad's shipped C-Fe database (Hallstedt et al., Calphad 34 (2010) 129, with the Brosh EOS)."""
    return pycalphad_db_dir / "cfe_broshe.tdb"
