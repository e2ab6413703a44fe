"""Extend a database with the phase of a `SublatticeModel` (the original and the parse cache are untouched)."""

from __future__ import annotations

import os
from collections.abc import Mapping
from typing import TYPE_CHECKING

from solubility.databases.pycalphad_io import copy_database
from solubility.databases.reader import LoadedDatabase, _make_loaded, _parse_text, element_data, load_database
from solubility.errors import DatabaseError

if TYPE_CHECKING:  # pragma: no cover
    from pycalphad import Database

    from solubility.models.sublattice import SublatticeModel

__all__ = ["add_model"]


def add_model(
    spec: str | os.PathLike | Database | LoadedDatabase,
    model: SublatticeModel,
    parameters: Mapping[str, str] | None = None,
) -> LoadedDatabase:
    """A copy of a database with the phase of `model` added (the original and the cache are untouched).

    Parameters
    ----------
    spec
        The database to extend (anything `load_database` takes, or a LoadedDatabase).
    model
        The interstitial phase; its elements must be in the database.
    parameters
        As in `SublatticeModel.tdb_block`; expressions may use the database's FUNCTIONs (``GHSERFE#``).

    Raises
    ------
    DatabaseError
        The phase exists already in the database, or an element of the model is missing.
    """
    base = spec if isinstance(spec, LoadedDatabase) else load_database(spec)
    if model.phase in base.db.phases:
        raise DatabaseError(
            f"phase {model.phase!r} exists already in database {base.name!r}; give another name"
        )
    elements = element_data(base, [*model.hosts, *model.interstitials])
    text = model.tdb_block(parameters, elements=elements)
    tmp, messages = _parse_text(text, f"model {model.phase}")
    db = copy_database(base.db)
    phase = tmp.phases[model.phase]
    db.add_phase(model.phase, dict(phase.model_hints), list(phase.sublattices))
    db.add_phase_constituents(model.phase, [[sp.name for sp in subl] for subl in phase.constituents])
    from tinydb import where

    for p in tmp.search(where("phase_name") == model.phase):
        db.add_parameter(
            p["parameter_type"],
            p["phase_name"],
            [[sp.name for sp in subl] for subl in p["constituent_array"]],
            p["parameter_order"],
            p["parameter"],
            ref=p.get("reference"),
            diffusing_species=getattr(p.get("diffusing_species"), "name", None),
            force_insert=True,
        )
    return _make_loaded(db, f"{base.name}+{model.phase}", None, None, (*base.warnings, *messages))
