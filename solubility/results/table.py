"""The solvus as a text table for people: numbers rounded to `DIGITS` significant digits, one notation per column.

Full precision lives in the CSV, NetCDF and JSON outputs; the table says how it rounds.
"""

from __future__ import annotations

import math

import numpy as np

from solubility.constants import ZERO_CELSIUS

__all__ = ["DIGITS", "column", "solvus_table"]

#: significant digits of the compositions in the table (a database rarely supports more)
DIGITS = 4


def _plain(v: float, digits: int) -> str:
    v = float(f"{v:.{digits - 1}e}")  # rounded to `digits` significant digits, trailing zeros kept below
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(v))))
    return f"{v:.{decimals}f}"


def column(values, digits: int = DIGITS) -> list[str]:
    """`values` to `digits` significant digits, all plain decimals or all scientific (when any is below 1e-3
    or at least 1e6), so a column never switches notation; NaN as "-"."""
    finite = [abs(float(v)) for v in values if math.isfinite(float(v)) and v != 0]
    plain = bool(finite) and min(finite) >= 1e-3 and max(finite) < 1e6
    out = []
    for v in values:
        v = float(v)
        if not math.isfinite(v):
            out.append("-")
        elif plain or v == 0:
            out.append(_plain(v, digits))
        else:
            out.append(f"{v:.{digits - 1}e}")
    return out


def _temperature(T: float) -> str:
    return f"{T:.2f} K ({T - ZERO_CELSIUS:.2f} C)"


def _composition(x: float, w: float) -> str:
    x_text, wt_text, ppm_text = (column([v])[0] for v in (x, 100 * w, 1e6 * w))
    return f"x = {x_text}, {wt_text} wt%, {ppm_text} ppm"


def solvus_table(ds) -> str:
    """The table printed by ``solubility solvus``: a row per temperature, then the partner changes, the most
    solute on the line and the Arrhenius fit, each with its composition as x, wt% and ppm by mass."""
    solute, phase = ds.attrs["solute"], ds.attrs["phase"]
    T = ds["T"].values.astype(float)
    ok = ds["status"].values == "ok"
    cols = {name: column(np.where(ok, values, np.nan)) for name, values in
            (("x", ds["X"].values), ("wt%", 100 * ds["W"].values), ("ppm", ds["PPM"].values),
             ("y", ds["Y"].values))}
    width = {name: max(len(name), *(len(c) for c in cells)) for name, cells in cols.items()}
    lines = [f"solvus of {solute} in {phase}  (database {ds.attrs['database']}, sha256 "
             f"{ds.attrs['database_sha256'][:12]}...; compositions to {DIGITS} significant digits)",
             f"{'T/K':>9} {'T/C':>8} " + " ".join(f"{n:>{width[n]}}" for n in cols) + "  partner / note"]
    for i in range(ds.sizes["T"]):
        head = f"{T[i]:9.2f} {T[i] - ZERO_CELSIUS:8.2f} "
        cells = " ".join(f"{cols[n][i]:>{width[n]}}" for n in cols)
        note = ds["partner"].values[i] if ok[i] else f"[{ds['status'].values[i]}] {ds['reason'].values[i]}"
        lines.append(f"{head}{cells}  {note}")
    from solubility.results.lower_end import change_lines, field_end_lines, lower_lines

    lines += change_lines(ds, _composition, _temperature)
    lines += change_lines(ds, _composition, _temperature, low=True)
    lines += field_end_lines(ds, _composition, _temperature)
    lines += lower_lines(ds, column)
    if "extreme_X" in ds and math.isfinite(float(ds["extreme_X"])):
        where = str(ds["extreme_partner"].values.item()).replace("|", " / ")
        edge = " (an end of the range: it may rise outside it)" if bool(ds["extreme_at_range_end"]) else ""
        lines.append(f"most {solute} on the line: {_composition(float(ds['extreme_X']), float(ds['extreme_W']))} "
                     f"at {_temperature(float(ds['extreme_T']))}, against {where}{edge}")
    if "fit_Q" in ds and math.isfinite(float(ds["fit_Q"])):
        lines.append(f"Arrhenius fit x = A exp(-Q/RT) against {ds['fit_partner'].values.item()}, "
                     f"{float(ds['fit_T_min']):.2f}-{float(ds['fit_T_max']):.2f} K ({int(ds['fit_points'])} points): "
                     f"apparent enthalpy of solution Q = {float(ds['fit_Q']) / 1e3:.1f} kJ/mol, pre-factor "
                     f"A = {column([float(ds['fit_A'])], 3)[0]}, R^2 = {float(ds['fit_R2']):.6f}")
    lines.append("Results are only as good as the database; verify against measurements. Applicable codes and "
                 "qualified engineering practice take precedence.")
    return "\n".join(lines)
