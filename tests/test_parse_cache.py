"""The disk cache of parsed databases: a file is parsed once, reused across runs, never trusted blindly.

The cache is an implementation device; what it must guarantee is checked against pycalphad itself: a cached
load gives the same Database as pycalphad's own parse (same phases and parameters), and every doubtful entry
(tampered, stale, unreadable) leads to a fresh parse.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import pickle

import pytest

import solubility
from solubility.databases import parse_cache, reader
from solubility.databases.reader import load_database
from solubility.errors import DatabaseError


@pytest.fixture()
def counted(monkeypatch, tmp_path, cfe_tdb_path):
    """A private cache folder, a copy of pycalphad's cfe_broshe.tdb, and a counter of real parses."""
    cache = tmp_path / "cache"
    monkeypatch.setenv(parse_cache.CACHE_ENV, str(cache))
    calls = []
    original = reader._parse_text

    def counting(text, label):
        calls.append(label)
        return original(text, label)

    monkeypatch.setattr(reader, "_parse_text", counting)
    path = tmp_path / "fec.tdb"
    path.write_bytes(cfe_tdb_path.read_bytes())
    reader.clear_cache()
    yield path, cache, calls
    reader.clear_cache()


def _entry(cache):
    (pick,) = cache.glob("*.pickle")
    return pick, pick.with_suffix(".json")


def _fresh_load(path):
    reader.clear_cache()  # forget the in-process copy: what follows is a new run as far as parsing goes
    return load_database(path)


def test_second_load_does_not_parse(counted, cfe_tdb_path):
    path, cache, calls = counted
    first = load_database(path)
    assert len(calls) == 1
    second = _fresh_load(path)
    assert len(calls) == 1, "the second load parsed again"
    assert second is not first and second.phases == first.phases and second.sha256 == first.sha256
    # the same Database pycalphad's own parse gives (pycalphad's Database.__eq__ compares every table)
    from pycalphad import Database

    assert second.db == Database(str(cfe_tdb_path))
    # folder and key are private (0700, 0600): a pickle runs code when loaded
    assert cache.stat().st_mode & 0o077 == 0
    assert (cache / "key").stat().st_mode & 0o077 == 0


def test_tampered_pickle_is_reparsed_and_rewritten(counted):
    path, cache, calls = counted
    load_database(path)
    pick, _ = _entry(cache)
    data = bytearray(pick.read_bytes())
    data[len(data) // 2] ^= 0xFF
    pick.write_bytes(bytes(data))
    _fresh_load(path)
    assert len(calls) == 2  # detected (HMAC mismatch) and parsed again
    _fresh_load(path)
    assert len(calls) == 2  # the rewritten entry is good


def test_truncated_pickle_and_missing_sidecar_are_reparsed(counted):
    path, cache, calls = counted
    load_database(path)
    pick, side = _entry(cache)
    pick.write_bytes(pick.read_bytes()[:100])
    _fresh_load(path)
    assert len(calls) == 2
    side.unlink()
    _fresh_load(path)
    assert len(calls) == 3


def test_unpicklable_entry_with_valid_mac_is_reparsed(counted):
    # an entry whose HMAC is right but whose pickle does not load (e.g. from another build of a library)
    path, cache, calls = counted
    load_database(path)
    pick, side = _entry(cache)
    junk = pickle.dumps(("not", "a", "database"))[:-3] + b"xyz"
    key = (cache / "key").read_bytes()
    meta = json.loads(side.read_text())
    meta["hmac_sha256"] = hmac.new(key, junk, hashlib.sha256).hexdigest()
    pick.write_bytes(junk)
    side.write_text(json.dumps(meta))
    assert _fresh_load(path).phases
    assert len(calls) == 2


def test_stale_version_key_is_not_used(counted, monkeypatch):
    path, cache, calls = counted
    load_database(path)
    monkeypatch.setattr(solubility, "__version__", "0.0.0+other")
    _fresh_load(path)
    assert len(calls) == 2  # another solubility version: its own entry
    assert len(list(cache.glob("*.pickle"))) == 2
    # a sidecar naming another key beside the right file name is refused too
    monkeypatch.undo()
    monkeypatch.setenv(parse_cache.CACHE_ENV, str(cache))
    monkeypatch.setattr(reader, "_parse_text", reader._parse_text)
    key = parse_cache.cache_key(hashlib.sha256(path.read_bytes()).hexdigest())
    side = cache / (hashlib.sha256(key.encode()).hexdigest() + ".json")
    meta = json.loads(side.read_text())
    meta["key"] = key.replace("pycalphad=", "pycalphad=0")
    side.write_text(json.dumps(meta))
    assert parse_cache._read(key) is None


def test_unwritable_or_shared_cache_folder_is_skipped(counted, monkeypatch, tmp_path):
    path, _cache, calls = counted
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    monkeypatch.setenv(parse_cache.CACHE_ENV, str(blocker / "cache"))  # cannot be made: a file is in the way
    assert load_database(path).phases
    assert _fresh_load(path).phases
    assert len(calls) == 2  # parsed each time, no error
    shared = tmp_path / "shared"
    shared.mkdir()
    shared.chmod(0o777)  # writable by others: not trusted, never used
    monkeypatch.setenv(parse_cache.CACHE_ENV, str(shared))
    _fresh_load(path)
    assert list(shared.iterdir()) == []


def test_guard_runs_before_the_first_parse_and_nothing_is_cached(counted, tmp_path):
    _path, cache, _calls = counted
    bad = tmp_path / "bad.tdb"
    bad.write_text(
        " ELEMENT FE BCC_A2 55.847 4489 27.28 !\n FUNCTION F 298.15 9**9**9; 6000 N !\n"
        " PHASE B % 1 1 !\n CONSTITUENT B :FE: !\n"
    )
    with pytest.raises(DatabaseError):
        load_database(bad)
    assert not cache.exists() or not list(cache.glob("*.pickle"))


def test_cache_dir_follows_environment(monkeypatch, tmp_path):
    monkeypatch.setenv(parse_cache.CACHE_ENV, str(tmp_path / "x"))
    assert parse_cache.cache_dir() == tmp_path / "x"
    monkeypatch.delenv(parse_cache.CACHE_ENV)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert parse_cache.cache_dir() == tmp_path / "xdg" / "solubility"
    monkeypatch.delenv("XDG_CACHE_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert parse_cache.cache_dir() == tmp_path / "home" / ".cache" / "solubility"
