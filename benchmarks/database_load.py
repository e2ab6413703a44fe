"""Load times of big databases, with and without the parse cache, measured in one process (run by hand).

    python benchmarks/database_load.py [PATH_TO_mf-steel.tdb]   (default ../shared/databases/mf-steel.tdb)

A) pycalphad's own ``Database(path)`` parse of the full steel database.
B) the tool's ``load_database(path)`` twice with a fresh cache folder: the first load parses (guard + parse +
   cache write), the second (in-process copy forgotten, as in a new run) reads the cache.
C) the bundled ``steel`` database: cold (parse, empty cache folder) and cached.

CPU seconds (``time.process_time``) and wall seconds are printed; the machine is shared, so the ratio B2/A,
measured in the same run, is what counts. Target (from the issue): second load <= 0.1 x pycalphad's parse.
A temporary cache folder is used (``SOLUBILITY_CACHE_DIR``); the user's own cache is not touched.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path


def _timed(fn):
    c0, w0 = time.process_time(), time.perf_counter()
    out = fn()
    return out, time.process_time() - c0, time.perf_counter() - w0


def _without_repeats(path: Path, folder: Path) -> tuple[Path, int]:
    """`path`, or a copy in `folder` without the PARAMETER, PHASE and CONSTITUENT commands that repeat an earlier
    one's name (the first is kept), and how many were dropped."""
    import re

    text = path.read_bytes().decode("utf-8", errors="replace")
    seen: set = set()
    dropped = 0

    def keep(m: re.Match) -> str:
        nonlocal dropped
        name, _, rest = re.sub(r"\s+", "", m.group(1)).upper().partition(",")
        body, _, order = rest.rstrip(")").partition(";")
        subl = ":".join(",".join(sorted(part.split(","))) for part in body.split(":"))
        key = f"{name},{subl};{order}"
        if key in seen:
            dropped += 1
            return ""
        seen.add(key)
        return m.group(0)

    cleaned = re.sub(r"^\s*PARAMETER\s+([^)]*\))[^!]*!", keep, text, flags=re.M | re.I)

    def keep_named(m: re.Match) -> str:  # PHASE and CONSTITUENT commands: the first of each name is kept
        nonlocal dropped
        key = (m.group(1).upper(), m.group(2).upper())
        if key in seen:
            dropped += 1
            return ""
        seen.add(key)
        return m.group(0)

    cleaned = re.sub(r"^\s*(PHASE)\s+(\S+)\s+\S+\s+\d[^!]*!", keep_named, cleaned, flags=re.M | re.I)
    cleaned = re.sub(r"^\s*(CONSTITUENT)\s+(\S+)\s*:[^!]*!", keep_named, cleaned, flags=re.M | re.I)
    if not dropped:
        return path, 0
    out = folder / path.name
    out.write_text(cleaned, encoding="utf-8")
    return out, dropped


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("path", nargs="?", default="../shared/databases/mf-steel.tdb")
    args = parser.parse_args(argv)
    path = Path(args.path)
    if not path.is_file():
        print(f"no database file {str(path)!r}; give the path to mf-steel.tdb", file=sys.stderr)
        return 2

    from pycalphad import Database

    from solubility.databases import reader
    from solubility.databases.parse_cache import CACHE_ENV

    with tempfile.TemporaryDirectory() as tmp:
        os.environ[CACHE_ENV] = str(Path(tmp) / "cache")
        path, dropped = _without_repeats(path, Path(tmp))
        if dropped:
            print(f"(the tool refuses a parameter or phase given twice (pycalphad would add parameters up): "
                  f"timed on a copy without the {dropped} later repeats, pycalphad's parse included)")
        _, a_cpu, a_wall = _timed(lambda: Database(str(path)))
        print(f"A  pycalphad Database() parse, full file      cpu {a_cpu:7.2f} s  wall {a_wall:7.2f} s")
        reader.clear_cache()
        _, b1_cpu, b1_wall = _timed(lambda: reader.load_database(path))
        print(f"B1 load_database, first (parse + cache write) cpu {b1_cpu:7.2f} s  wall {b1_wall:7.2f} s")
        reader.clear_cache()
        _, b2_cpu, b2_wall = _timed(lambda: reader.load_database(path))
        print(f"B2 load_database, second (cached)             cpu {b2_cpu:7.2f} s  wall {b2_wall:7.2f} s")
        print(f"ratio B2/A (target <= 0.1): cpu {b2_cpu / a_cpu:.3f}, wall {b2_wall / a_wall:.3f}")
        reader.clear_cache()
        _, c1_cpu, c1_wall = _timed(lambda: reader.load_database("steel"))
        print(f"C1 bundled steel, cold (parse)                cpu {c1_cpu:7.2f} s  wall {c1_wall:7.2f} s")
        reader.clear_cache()
        _, c2_cpu, c2_wall = _timed(lambda: reader.load_database("steel"))
        print(f"C2 bundled steel, cached                      cpu {c2_cpu:7.2f} s  wall {c2_wall:7.2f} s")
        reader.clear_cache()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
