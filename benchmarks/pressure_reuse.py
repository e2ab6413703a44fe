"""Cost of a solvus line at a new pressure against a line at an already-seen pressure (run by hand).

    python benchmarks/pressure_reuse.py [--rounds 5] [--temperatures 100]

C in BCC_A2 of the bundled Fe-C database, every phase but GRAPHITE and DIAMOND_A4 a candidate, 100 temperatures
from 500 to 990 K. Pressure is a runtime input of the compiled Gibbs energy functions, so a line at a pressure
never seen before must cost about what a line at a seen pressure costs (no compilation). Both are timed side by
side in one process, alternating, after one warm-up line that compiles the system; the machine is shared and
noisy, so only the ratio of the medians means anything. Target (from the issue): ratio <= 1.5 (about 10 before
the compiled system stopped being keyed by pressure). The count of compilations is printed as well: it must not
grow during the timed rounds.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

EXCLUDE = ["GRAPHITE", "DIAMOND_A4"]
SEEN = 101325.0  # Pa


def _line(temperatures: np.ndarray, pressure: float):
    import solubility

    return solubility.solvus("fe-c", "BCC_A2", "C", temperatures, exclude=EXCLUDE, pressure=pressure)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--temperatures", type=int, default=100)
    args = parser.parse_args(argv)

    from solubility.thermo.cache import cache_info

    T = np.linspace(500.0, 990.0, args.temperatures)
    _line(T, SEEN)  # warm up: load the database and compile the system once
    builds = cache_info()["builds"]
    seen, new = [], []
    for k in range(args.rounds):
        t0 = time.perf_counter()
        _line(T, SEEN)
        seen.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        _line(T, SEEN * (2.0 + k))  # a pressure not used before in this process
        new.append(time.perf_counter() - t0)
    compiled = cache_info()["builds"] - builds
    t_seen, t_new = statistics.median(seen), statistics.median(new)
    print(f"solvus of C in BCC_A2, bundled Fe-C database, {T.size} temperatures 500-990 K")
    print(f"line at a seen pressure: {t_seen:7.3f} s   (median of {args.rounds})")
    print(f"line at a new pressure:  {t_new:7.3f} s   (median of {args.rounds})")
    print(f"ratio new/seen = {t_new / t_seen:.3f}   (target <= 1.5)")
    print(f"compilations during the timed rounds: {compiled}   (must be 0)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
