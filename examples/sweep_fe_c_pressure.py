"""Screen how pressure moves the carbon solubility limits of ferrite and austenite (a scripted sweep).

Reads the job file beside this script (12 cases: 2 host phases x stable/metastable partner x 3 pressures),
runs it on local worker processes and draws the solvus lines in wt% C against temperature in °C, one panel per
host phase: one colour per pressure (in GPa), solid lines where every phase may form (stable diagram), dashed
where graphite and diamond are excluded (metastable), and a marker per point naming the partner found there
(graphite, diamond, cementite, ...), since "graphite allowed" does not mean "graphite found" at 1 and 3 GPa.

    python examples/sweep_fe_c_pressure.py [--output FIGURE.png] [--workers N] [--store DIR] [--tiny]

``--tiny`` keeps three temperatures per case (a quick check that everything runs).
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
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


#: marker of each partner phase found on a line (the legend names them)
PARTNER_MARKERS = {"GRAPHITE": "o", "DIAMOND_A4": "D", "CEMENTITE_D011": "s", "M7C3_D101": "v", "LIQUID": "^",
                   "FCC_A1": "P", "BCC_A2": "X"}
HOSTS = {"BCC_A2": "ferrite (BCC_A2)", "FCC_A1": "austenite (FCC_A1)"}


def gpa(pressure_pa: float) -> str:
    """A pressure in GPa as a reader writes it: 1 GPa, 3 GPa, 1e-4 GPa as 10^-4 GPa (1 bar)."""
    p = pressure_pa / 1e9
    if p >= 0.01:
        return f"{p:g} GPa"
    exp = math.floor(math.log10(p))
    mant = p / 10**exp
    text = rf"$10^{{{exp}}}$" if abs(mant - 1) < 1e-9 else rf"${mant:g}\times10^{{{exp}}}$"
    return f"{text} GPa ({pressure_pa / 1e5:g} bar)"


def plain_log_ticks(ax) -> None:
    """Tick labels of a log y axis as plain numbers (0.6, 1, 2 rather than 6x10^-1), 1-2-5 within a decade."""
    from matplotlib import ticker

    lo, hi = ax.get_ylim()
    plain = ticker.FuncFormatter(lambda v, _: f"{v:g}")
    ax.yaxis.set_major_locator(ticker.LogLocator(subs=(1.0, 2.0, 5.0) if hi / lo < 30 else (1.0,)))
    ax.yaxis.set_major_formatter(plain)
    ax.yaxis.set_minor_formatter(ticker.NullFormatter())


def figure(ds, path: Path) -> Path:
    """Solvus lines of the sweep, C in wt% (log) against T in °C, one panel per host phase.

    Colour: pressure. Line style: which phases may form (all of them: the stable diagram; graphite and
    diamond excluded: the metastable one). Marker: the partner phase actually found at each point.
    """
    from matplotlib.lines import Line2D

    pressures = sorted(set(ds["pressure"].values.tolist()))
    colours = dict(zip(pressures, ["tab:blue", "tab:orange", "tab:red", "tab:green"], strict=False))
    phases = list(dict.fromkeys(ds["phase"].values.tolist()))
    fig, axes = plt.subplots(1, len(phases), figsize=(6 * len(phases), 5), squeeze=False, layout="constrained")
    found: set[str] = set()
    for ax, phase in zip(axes[0], phases, strict=True):
        for name in ds["case"].values.tolist():
            one = case_dataset(ds, name)
            if one.attrs["phase"] != phase or one.attrs["case_status"] != "ok":
                continue
            metastable = bool(one.attrs["exclude"])
            colour = colours[one.attrs["pressure_Pa"]]
            ok = one["status"].values == "ok"
            T_C, wt = one["T_C"].values[ok], 100 * one["W"].values[ok]
            ax.plot(T_C, wt, color=colour, linestyle="--" if metastable else "-", lw=1.2)
            for partner in sorted(set(one["partner"].values[ok].tolist())):
                sel = one["partner"].values[ok] == partner
                found.add(partner)
                ax.plot(T_C[sel], wt[sel], linestyle="none", marker=PARTNER_MARKERS.get(partner, "*"), ms=4,
                        mfc=colour, mec="0.15", mew=0.4)
        ax.set_yscale("log")
        plain_log_ticks(ax)
        ax.set_xlabel("temperature, °C")
        ax.set_ylabel(f"C in {HOSTS.get(phase, phase)} at the solvus, wt%")
        ax.set_title(f"C in {HOSTS.get(phase, phase)}", fontsize=11)
        ax.grid(True, which="major", lw=0.3, alpha=0.5)
    handles = [Line2D([], [], color=colours[p], lw=2, label=gpa(p)) for p in pressures]
    handles += [Line2D([], [], color="0.3", ls="-", label="all phases may form (stable diagram)"),
                Line2D([], [], color="0.3", ls="--", label="graphite and diamond excluded (metastable)")]
    handles += [Line2D([], [], color="0.3", ls="none", marker=PARTNER_MARKERS.get(p, "*"), mfc="white",
                       label=f"partner found: {p}") for p in sorted(found)]
    fig.legend(handles=handles, loc="outside lower center", ncols=4, fontsize=8, frameon=False,
               title="colour: pressure; line: phases allowed; marker: partner phase at the point",
               title_fontsize=9)
    fig.suptitle("Carbon solubility limits under pressure (bundled Fe-C database)")
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
