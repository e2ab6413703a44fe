"""The lower end of the host's field and the temperatures where the field opens or closes, in the solvus Dataset;
the partner changes of either end as JSON, CSV header lines and table lines (`change_rows` and the functions after
it).

Variables (dims ``T``; ``field_end`` for the openings and closings), present when the line solved them
(`solubility.calc.lower`):

============== ======= ==========================================================================================
variable        units   meaning
============== ======= ==========================================================================================
X_LOW           1       mole fraction of the solute in the host at the lower end of its field
W_LOW           1       mass fraction of the solute there
PPM_LOW         ppm     parts per million by mass there
Y_LOW           1       site fraction of the solute on the interstitial sublattice there
partner_low     -       phase(s) at zero amount on the lower boundary (solute-poorer than the host)
status_low      -       ok, no_partner (stable down to the smallest content searched), host_unstable,
                        below_limit or failed
reason_low      -       why the lower end has no number; "" otherwise
field_end_T     K       temperature where the host's field opens or closes, to 0.01 K
field_end_X     1       mole fraction of the solute in the host there (where its lower and upper ends meet; NaN
                        where a field without a lower end opens or closes at zero solute content)
field_end_W     1       mass fraction of the solute there
field_end_PPM   ppm     parts per million by mass there
field_end_kind  -       "opens" (with rising temperature the field appears) or "closes" (it disappears)
field_end_with  -       the phases the host meets there, joined by "+"
============== ======= ==========================================================================================

Along ``change_low``, where the lower end's partner changes (located to 0.01 K as the solvus's partner changes
along ``change``): ``partner_low_change_T`` (K), ``partner_low_change_X``, ``partner_low_change_W`` (1),
``partner_low_change_PPM`` (ppm) of the solute in the host there, ``partner_low_below``, ``partner_low_above``.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["CSV_COLUMNS", "change_csv", "change_lines", "change_rows", "changes_json", "field_end_lines", "lower_json",
           "lower_lines", "lower_runs", "lower_variables"]

#: the CSV columns of the lower end (after the solvus's own)
CSV_COLUMNS = ["X_LOW", "W_LOW", "WT%_LOW", "PPM_LOW", "Y_LOW", "partner_low", "status_low", "reason_low"]


def lower_variables(line, solute: str, where: str, composition) -> dict:
    """Data variables of the lower end and the field's ends (empty when the line did not solve them).

    `composition(line, s)` gives (x, w, y) of the solute in the host at ln y = s.
    """
    if not line.lower:
        return {}
    low = line.lower
    n = len(low)
    X, W, Y = (np.full(n, np.nan) for _ in range(3))
    for i, p in enumerate(low):
        if p.valid:
            X[i], W[i], Y[i] = composition(line, p.s)
    ends = line.field_ends
    xw = np.array([composition(line, f.s)[:2] for f in ends]).reshape(-1, 2)
    changes = getattr(line, "lower_changes", ())
    cxw = np.array([composition(line, c.s)[:2] for c in changes]).reshape(-1, 2)
    return {
        "X_LOW": ("T", X, {"units": "1", "long_name": f"mole fraction of {solute} {where} at the lower end of "
                                                     "its field"}),
        "W_LOW": ("T", W, {"units": "1", "long_name": f"mass fraction of {solute} {where} at the lower end of "
                                                     "its field"}),
        "PPM_LOW": ("T", W * 1e6, {"units": "ppm", "long_name": f"{solute} {where} at the lower end of its "
                                                               "field, parts per million by mass"}),
        "Y_LOW": ("T", Y, {"units": "1", "long_name": f"site fraction of {solute} at the lower end of the field"}),
        "partner_low": ("T", np.array(["+".join(p.partners) for p in low], dtype=object),
                        {"units": "", "long_name": "coexisting phase(s) at zero amount on the lower boundary"}),
        "status_low": ("T", np.array([p.status for p in low], dtype=object),
                       {"units": "", "long_name": "lower end: ok, no_partner (stable down to the smallest content "
                                                  "searched), host_unstable, below_limit or failed"}),
        "reason_low": ("T", np.array([p.reason for p in low], dtype=object),
                       {"units": "", "long_name": "why the lower end has no number"}),
        "field_end_T": ("field_end", np.array([f.T for f in ends], dtype=float),
                        {"units": "K", "long_name": "temperature where the host's field opens or closes"}),
        "field_end_X": ("field_end", xw[:, 0], {"units": "1", "long_name": f"mole fraction of {solute} {where} "
                                                                            "where its field opens or closes"}),
        "field_end_W": ("field_end", xw[:, 1], {"units": "1", "long_name": f"mass fraction of {solute} {where} "
                                                                            "where its field opens or closes"}),
        "field_end_PPM": ("field_end", xw[:, 1] * 1e6,
                          {"units": "ppm", "long_name": f"{solute} {where} where its field opens or closes, "
                                                        "ppm by mass"}),
        "field_end_kind": ("field_end", np.array([f.kind for f in ends], dtype=object),
                           {"units": "", "long_name": "opens or closes, with rising temperature"}),
        "field_end_with": ("field_end", np.array(["+".join(f.partners) for f in ends], dtype=object),
                           {"units": "", "long_name": "phases the host meets where its field opens or closes"}),
        "partner_low_change_T": ("change_low", np.array([c.T for c in changes], dtype=float),
                                 {"units": "K", "long_name": "temperature where the lower end's partner changes"}),
        "partner_low_change_X": ("change_low", cxw[:, 0],
                                 {"units": "1", "long_name": f"mole fraction of {solute} {where} at the lower end "
                                                             "where its partner changes"}),
        "partner_low_change_W": ("change_low", cxw[:, 1],
                                 {"units": "1", "long_name": f"mass fraction of {solute} {where} at the lower end "
                                                             "where its partner changes"}),
        "partner_low_change_PPM": ("change_low", cxw[:, 1] * 1e6,
                                   {"units": "ppm", "long_name": f"{solute} {where} at the lower end where its "
                                                                 "partner changes, ppm by mass"}),
        "partner_low_below": ("change_low", np.array(["+".join(c.below) for c in changes], dtype=object),
                              {"units": "", "long_name": "lower end's partner below the change"}),
        "partner_low_above": ("change_low", np.array(["+".join(c.above) for c in changes], dtype=object),
                              {"units": "", "long_name": "lower end's partner above the change"}),
    }


def _finite(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def lower_json(ds) -> dict:
    """The JSON keys of the lower end and the field's ends (empty when the Dataset has none)."""
    if "status_low" not in ds:
        return {}
    ok = ds["status_low"].values == "ok"
    ends = []
    for t, x, w, kind, with_ in zip(ds["field_end_T"].values, ds["field_end_X"].values, ds["field_end_W"].values,
                                    ds["field_end_kind"].values, ds["field_end_with"].values, strict=True):
        w = _finite(w)
        ends.append({"temperature_K": _finite(t), "kind": str(kind), "mole_fraction": _finite(x),
                     "mass_fraction": w, "wt_percent": None if w is None else 100.0 * w,
                     "ppm": None if w is None else 1e6 * w, "phases": str(with_).split("+")})
    return {
        "lower_mole_fraction": [_finite(v) for v in ds["X_LOW"].values],
        "lower_mass_fraction": [_finite(v) for v in ds["W_LOW"].values],
        "lower_site_fraction": [_finite(v) for v in ds["Y_LOW"].values],
        "lower_partner_phases": [str(p).split("+") if (p and o) else [] for p, o in zip(ds["partner_low"].values,
                                                                                         ok, strict=True)],
        "lower_status": [str(v) for v in ds["status_low"].values],
        "lower_reason": [str(v) for v in ds["reason_low"].values],
        "field_ends": ends,
        **({"lower_partner_changes": changes_json(ds, low=True)} if "partner_low_change_T" in ds else {}),
    }


#: the Dataset's variables of partner changes at each end of the field: T, X, W, below, above
_CHANGE_VARS = {
    False: ("partner_change_T", "partner_change_X", "partner_change_W", "partner_below", "partner_above"),
    True: ("partner_low_change_T", "partner_low_change_X", "partner_low_change_W", "partner_low_below",
           "partner_low_above"),
}


def change_rows(ds, low: bool = False) -> list[tuple]:
    """(T K, X, W, below, above) of each partner change at the upper end (the solvus) or the lower end."""
    names = _CHANGE_VARS[low]
    if names[0] not in ds:
        return []
    return list(zip(*(ds[n].values for n in names), strict=True))


def changes_json(ds, low: bool = False) -> list[dict]:
    """Partner changes at one end as JSON objects (``partner_changes``, ``lower_partner_changes``)."""
    out = []
    for t, x, w, b, a in change_rows(ds, low):
        w = _finite(w)
        out.append({"temperature_K": _finite(t), "mole_fraction": _finite(x), "mass_fraction": w,
                    "wt_percent": None if w is None else 100.0 * w, "ppm": None if w is None else 1e6 * w,
                    "below": str(b).split("+"), "above": str(a).split("+")})
    return out


def change_csv(ds, cell, low: bool = False) -> list[str]:
    """CSV header lines (``# partner_change: ...``, ``# lower_partner_change: ...``) of one end's partner
    changes; `cell(value)` writes a number in full precision."""
    key = "lower_partner_change" if low else "partner_change"
    return [f"# {key}: T [K] {cell(t)}, X [1] {cell(x)}, W [1] {cell(w)}, {b} below, {a} above\n"
            for t, x, w, b, a in change_rows(ds, low)]


def change_lines(ds, composition, temperature, low: bool = False) -> list[str]:
    """Table lines of one end's partner changes."""
    which = "lower end's partner" if low else "partner"
    out = []
    for Tc, xc, wc, below, above in change_rows(ds, low):
        if math.isfinite(float(Tc)):
            out.append(f"{which} changes at {temperature(float(Tc))}: {below} below, {above} above; "
                       f"{composition(float(xc), float(wc))}")
        else:
            out.append(f"{which} changes at an unlocated temperature: {below} below, {above} above")
    return out


def lower_lines(ds, column) -> list[str]:
    """Table lines of the lower end (none when no point has one): a row per temperature with a lower boundary.

    `column(values)` formats a column of numbers.
    """
    if "status_low" not in ds:
        return []
    status = ds["status_low"].values
    rows = [i for i in np.argsort(ds["T"].values, kind="stable") if status[i] in ("ok", "failed")
            and ds["status"].values[i] in ("ok", "no_partner")]
    if not any(status[i] == "ok" for i in rows):
        return []
    ok = status == "ok"
    cols = {name: column(np.where(ok, values, np.nan)[rows]) for name, values in
            (("x", ds["X_LOW"].values), ("wt%", 100 * ds["W_LOW"].values), ("ppm", ds["PPM_LOW"].values),
             ("y", ds["Y_LOW"].values))}
    width = {name: max(len(name), *(len(c) for c in cells)) for name, cells in cols.items()}
    solute, phase = ds.attrs["solute"], ds.attrs["phase"]
    T, T_C = ds["T"].values.astype(float), ds["T_C"].values.astype(float)
    lines = [f"lower end of the {phase} field (another phase is more stable at lower {solute}; other temperatures: "
             "none down to the smallest content searched)",
             f"{'T/K':>9} {'T/C':>8} " + " ".join(f"{n:>{width[n]}}" for n in cols) + "  partner / note"]
    for k, i in enumerate(rows):
        cells = " ".join(f"{cols[n][k]:>{width[n]}}" for n in cols)
        note = ds["partner_low"].values[i] if ok[i] else f"[{status[i]}] {ds['reason_low'].values[i]}"
        lines.append(f"{T[i]:9.2f} {T_C[i]:8.2f} {cells}  {note}")
    return lines


def field_end_lines(ds, composition, temperature) -> list[str]:
    """Table lines of the temperatures where the host's field opens or closes."""
    if "field_end_T" not in ds:
        return []
    out = []
    phase = ds.attrs["phase"]
    for Tf, x, w, kind, with_ in zip(ds["field_end_T"].values, ds["field_end_X"].values, ds["field_end_W"].values,
                                     ds["field_end_kind"].values, ds["field_end_with"].values, strict=True):
        meets = " + ".join(str(with_).split("+"))
        if not math.isfinite(float(Tf)):
            out.append(f"the {phase} field {kind} at an unlocated temperature (meeting {meets})")
            continue
        where = f"; {composition(float(x), float(w))}" if math.isfinite(float(x)) else " at zero content"
        out.append(f"the {phase} field {kind} (with rising temperature) at {temperature(float(Tf))}, meeting "
                   f"{meets}{where}")
    return out


def lower_runs(ds) -> list[tuple[str, np.ndarray]]:
    """Runs of consecutive (by temperature) lower ends with a number and one partner: (partner, indices), each
    run sorted by temperature (the dashed lines of the figure)."""
    if "status_low" not in ds:
        return []
    status, partner = ds["status_low"].values, ds["partner_low"].values
    runs: list[tuple[str, list[int]]] = []
    for i in np.argsort(ds["T"].values, kind="stable"):
        if status[i] != "ok":
            runs.append(("", []))
        elif runs and runs[-1][0] == str(partner[i]) and runs[-1][1]:
            runs[-1][1].append(int(i))
        else:
            runs.append((str(partner[i]), [int(i)]))
    return [(p, np.array(idx, dtype=int)) for p, idx in runs if idx]
