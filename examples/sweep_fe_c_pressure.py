"""Screen how pressure moves the carbon solubility limits of ferrite and austenite (a scripted sweep).

Reads the job file beside this script (12 cases: 2 host phases x stable/metastable partner x 3 pressures),
runs it on local worker processes and draws the solvus lines in wt% C against temperature, one panel per host
phase: solid lines against graphite (stable), dashed against cementite (metastable), one colour per pressure.

    python examples/sweep_fe_c_pressure.py [--output FIGURE.png] [--workers N] [--store DIR] [--tiny]

``--tiny`` keeps three temperatures per case (a quick check that everything runs).
"""

from __future__ import annotations

import argparse
import dataclasses
import json
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt

from solubility.sweeps import case_dataset, read_job, sweep

JOB = Path(__file__).with_name("sweep_fe_c_pressure.toml")


def tiny(cases):
    """The same cases with only their first, middle and last temperatures."""
    out = []
    for case in cases:
        T = case.temperatures
        out.append(dataclasses.replace(case, temperatures=sorted({T[0], T[len(T) // 2], T[-1]})))
    return out


def figure(ds, path: Path) -> Path:
    """Solvus lines of the sweep, W in wt% against T in degrees C, one panel per host phase."""
    pressures = sorted(set(ds["pressure"].values.tolist()))
    colours = dict(zip(pressures, ["tab:blue", "tab:orange", "tab:red", "tab:green"], strict=False))
    phases = list(dict.fromkeys(ds["phase"].values.tolist()))
    fig, axes = plt.subplots(1, len(phases), figsize=(5 * len(phases), 4), squeeze=False)
    for ax, phase in zip(axes[0], phases, strict=True):
        for name in ds["case"].values.tolist():
            one = case_dataset(ds, name)
            if one.attrs["phase"] != phase or one.attrs["case_status"] != "ok":
                continue
            metastable = bool(one.attrs["exclude"])
            ax.plot(one["T_C"], 100 * one["W"], color=colours[one.attrs["pressure_Pa"]],
                    linestyle="--" if metastable else "-",
                    label=f"{one.attrs['pressure_Pa'] / 1e9:g} GPa, {'cementite' if metastable else 'graphite'}")
        ax.set_yscale("log")
        ax.set_xlabel("temperature (degC)")
        ax.set_ylabel("C in the host at the solvus (wt%)")
        ax.set_title(f"C in {phase}")
        ax.legend(fontsize="small")
    fig.suptitle("Carbon solubility limits under pressure (bundled Fe-C database)")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--output", type=Path, default=Path("sweep_fe_c_pressure.png"), help="figure file")
    parser.add_argument("--workers", type=int, default=None, help="worker processes (default: one per CPU)")
    parser.add_argument("--store", help="store folder: finished cases survive an interruption (then rerun)")
    parser.add_argument("--tiny", action="store_true", help="three temperatures per case")
    args = parser.parse_args(argv)
    cases = read_job(JOB)
    if args.tiny:
        cases = tiny(cases)
    ds = sweep(cases, workers=args.workers, store=args.store, resume=args.store is not None)
    figure(ds, args.output)
    ok = ds["case_status"].values.tolist().count("ok")
    print(json.dumps({"cases": len(cases), "ok": ok, "figure": str(args.output)}))
    return 0 if ok == len(cases) else 1


if __name__ == "__main__":  # required: worker processes import this file again
    raise SystemExit(main())
