"""The per-process cache of compiled systems (least recently used first out), keyed by the content of what they
compile: the database's sha256 (or `solubility.databases.pycalphad_io.database_digest` of an in-memory Database,
so a database changed in place is compiled again), the elements, the phases and the names of the free
parameters. Pressure and parameter values are not part of the key: they are given to `CompiledSystem.bind`.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Sequence

from solubility.databases.pycalphad_io import database_digest
from solubility.thermo.system import CompiledSystem

__all__ = ["CACHE_SIZE", "cache_info", "clear_cache", "compiled_system", "database_digest"]

#: compiled systems kept per process (least recently used first out); one costs a few MB
CACHE_SIZE = 16

_CACHE: OrderedDict[tuple, CompiledSystem] = OrderedDict()
_CACHE_LOCK = threading.Lock()
_STATS = {"builds": 0, "hits": 0}


def compiled_system(db, elements: Sequence[str], phases: Sequence[str], parameters: Sequence[str] = (),
                    *, key: str | None = None) -> CompiledSystem:
    """The cached `CompiledSystem` for this database content, elements, phases and free parameters.

    Parameters
    ----------
    db
        pycalphad Database.
    elements, phases, parameters
        As in `CompiledSystem`.
    key
        A stable identity of the database's content (the sha256 of its file); by default `database_digest(db)`.
    """
    content = key if key is not None else database_digest(db)
    cache_key = (content, tuple(sorted(elements)), tuple(sorted(phases)), tuple(sorted(map(str, parameters))))
    with _CACHE_LOCK:
        system = _CACHE.get(cache_key)
        if system is not None:
            _CACHE.move_to_end(cache_key)
            _STATS["hits"] += 1
            return system
        system = CompiledSystem(db, sorted(elements), sorted(phases), sorted(map(str, parameters)))
        _STATS["builds"] += 1
        _CACHE[cache_key] = system
        while len(_CACHE) > CACHE_SIZE:
            _CACHE.popitem(last=False)
    return system


def cache_info() -> dict[str, int]:
    """Counters of the compiled-system cache: ``builds`` (compilations), ``hits``, ``size``, ``max_size``."""
    with _CACHE_LOCK:
        return {**_STATS, "size": len(_CACHE), "max_size": CACHE_SIZE}


def clear_cache() -> None:
    """Forget every compiled system (the counters stay)."""
    with _CACHE_LOCK:
        _CACHE.clear()
