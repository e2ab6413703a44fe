"""A two-parameter fit to 30 points against one solvus line over the same 30 temperatures (ratio in one run).

Data: the fe-c ferrite/cementite solvus from the engine itself at A = 322050, B = 75.667 (the database's values),
fitted from A = 300000, B = 70. Target (issue 11): the fit costs at most 40 solvus lines.

    python benchmarks/fit_speed.py
"""

from __future__ import annotations

import csv
import tempfile
import time
from pathlib import Path

import numpy as np

from solubility.api import fit
from solubility.calc.boundary import solvus_line
from solubility.calc.fitting import free_database
from solubility.calc.host import prepare_host

EXCLUDE = ("GRAPHITE", "DIAMOND_A4", "FCC_A1", "HCP_A3", "LIQUID", "M7C3_D101")
KEY = "G(BCC_A2,FE:C;0)"
EXPR = ("GA2FE#+3*GA9C#+A+B*T+IGPA2FC#+3*R#*T*LN(IEA2FE#)-3*R#*T*LN(IE0A2FE#)+9*R#*T*LN(IEA2C#)"
        "-9*R#*T*LN(IE0A2C#)")


def main() -> None:
    T = np.linspace(650.0, 990.0, 30)
    ldb, _ = free_database("fe-c", KEY, EXPR)
    req = prepare_host(ldb, "BCC_A2", "C", exclude=EXCLUDE, parameters={"A": 322050.0, "B": 75.667})
    solvus_line(req, T)  # warm
    t0 = time.perf_counter()
    line = solvus_line(req, T)
    t_line = time.perf_counter() - t0
    k = list(line.elements).index("C")
    xs = []
    for pt in line.points:
        m = line.host_moles @ line.host.y(pt.s)
        xs.append(m[k] / sum(m[i] for i, e in enumerate(line.elements) if e != "VA"))
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "data.csv"
        with open(path, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["T_K", "x"])
            w.writerows(zip(T, xs, strict=True))
        t0 = time.perf_counter()
        res = fit(path, "fe-c", "BCC_A2", "C", f"{KEY}={EXPR}", start={"A": 300000.0, "B": 70.0}, exclude=EXCLUDE)
        t_fit = time.perf_counter() - t0
    print(f"one solvus line, 30 temperatures: {t_line:.3f} s")
    print(f"two-parameter fit, 30 points:     {t_fit:.3f} s ({res.n_solvus_lines} solvus lines evaluated)")
    print(f"ratio fit / line: {t_fit / t_line:.1f} (target <= 40)")
    print(f"A = {res.values[0]:.6f}, B = {res.values[1]:.9f}")


if __name__ == "__main__":
    main()
