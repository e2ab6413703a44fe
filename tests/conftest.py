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


@pytest.fixture(scope="session", autouse=True)
def _private_parse_cache(tmp_path_factory: pytest.TempPathFactory):
    """Every test (and every CLI subprocess it starts) caches parsed databases in a temporary folder, never in
    the user's own cache folder."""
    import os

    from solubility.databases.parse_cache import CACHE_ENV

    folder = tmp_path_factory.mktemp("parse-cache")
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv(CACHE_ENV, str(folder))
        yield folder
    assert os.environ.get(CACHE_ENV) != str(folder)


@pytest.fixture(scope="session")
def steel_db():
    """The bundled `steel` database, loaded once per session (a LoadedDatabase; do not mutate it)."""
    from solubility.databases.reader import load_database

    return load_database("steel")
