"""Cost of an uptake line against a solvus line on the same system, per temperature (run by hand).

    python benchmarks/uptake_speed.py [--rounds 3] [--points 200]

Both on the bundled Fe-C database, host FCC_A1, solute C, the same temperatures in the austenite + graphite
field (1050-1400 K): `solubility.solvus` (the graphite solvus) and `solubility.uptake` at a_C = 0.5 against
graphite (every candidate checked at each point). The compiled system is built once before timing; the figures
are medians over rounds. Target (issue 14): uptake / solvus <= 1 per temperature. The machine is shared and noisy:
only the ratio, measured in the same run, means anything.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--points", type=int, default=200)
    args = ap.parse_args()

    import solubility

    T = np.linspace(1050.0, 1400.0, args.points)
    solubility.solvus("fe-c", "FCC_A1", "C", T[:2])  # build and cache the compiled system
    solubility.uptake("fe-c", "FCC_A1", "C", T[:2], activity=0.5)
    times = {"solvus": [], "uptake": []}
    for _ in range(args.rounds):
        t0 = time.perf_counter()
        sv = solubility.solvus("fe-c", "FCC_A1", "C", T)
        t1 = time.perf_counter()
        up = solubility.uptake("fe-c", "FCC_A1", "C", T, activity=0.5)
        t2 = time.perf_counter()
        times["solvus"].append(t1 - t0)
        times["uptake"].append(t2 - t1)
    assert (sv.status.values == "ok").all() and (up.status.values == "ok").all()
    s, u = statistics.median(times["solvus"]), statistics.median(times["uptake"])
    print(f"{args.points} temperatures, median of {args.rounds} rounds")
    print(f"solvus line: {1e3 * s / args.points:8.3f} ms per temperature")
    print(f"uptake line: {1e3 * u / args.points:8.3f} ms per temperature")
    print(f"ratio uptake / solvus: {u / s:.3f}  (target <= 1)")


if __name__ == "__main__":
    main()
