"""The uptake Dataset, its Sieverts constants and its JSON and CSV forms.

Dataset schema (dim ``T``; ``component`` for chemical potentials):

============ ======================= ==============================================================
variable     units                   meaning
============ ======================= ==============================================================
X, W, PPM    1, 1, ppm               solute content of the host (mole fraction, mass fraction, ppm)
Y            1                       site fraction of the solute on the interstitial sublattice
activity     1                       the solute's activity against the reference (attr ``reference``)
MU_SOLUTE    J/mol                   the solute's chemical potential set by the surroundings (SER)
derived      see long_name           the trade's quantity of an atmosphere (nitriding potential, ...)
status       -                       ok, metastable, below_limit or failed
reason       -                       why a point has no number, or which phase forms instead
forms_instead -                      phases more stable than the host at that potential, "+"-joined
DF_MAX       J/mol                   largest driving force of another candidate (> 0: metastable)
MU           J/mol                   the host's chemical potentials
KS_X         Pa^-1/2                 Sieverts constant x / sqrt(p) (partial-pressure uptake only)
KS_CM3       cm3(STP)/(100 g)/atm^½  the same as gas volume of X2 at 273.15 K, 1 atm per 100 g of host
KS_PPM       ppm/bar^½               the same in ppm by mass per sqrt(bar)
============ ======================= ==============================================================

Metastable points keep their numbers (the host's content if it stays), flagged by ``status``.
"""

from __future__ import annotations

import math

import numpy as np

from solubility.constants import ZERO_CELSIUS, R
from solubility.results.dataset import CAUTION, _composition, _versions, request_attrs

__all__ = ["build_limit_dataset", "build_uptake_dataset", "sieverts_fit", "uptake_csv_text", "uptake_json"]

#: molar volume of an ideal gas at 273.15 K and 101325 Pa, cm3/mol (R T / p with R = 8.314462618)
V_STP = 22413.97
_ATM, _BAR = 101325.0, 1e5


def sieverts_fit(T, KS, T_range=None) -> tuple[float, float, int]:
    """Apparent enthalpy of solution from ln K_S = ln K0 - dH / (R T), least squares over `T_range`.

    Returns
    -------
    dH, K0, n
        J per mole of dissolved X atoms (1/2 X2(g) -> X; > 0: endothermic, the content rises with T), the
        prefactor in the units of `KS`, and the number of points used (dH is nan with fewer than two).
    """
    T, KS = np.asarray(T, dtype=float), np.asarray(KS, dtype=float)
    keep = np.isfinite(KS) & (KS > 0)
    if T_range is not None:
        keep &= (T_range[0] <= T) & (T_range[1] >= T)
    if keep.sum() < 2:
        return math.nan, math.nan, int(keep.sum())
    slope, icpt = np.polyfit(1.0 / T[keep], np.log(KS[keep]), 1)
    return float(-slope * R), float(math.exp(icpt)), int(keep.sum())


def build_uptake_dataset(line, job, surroundings, *, sieverts_range=None):
    """The uptake Dataset from a `solubility.calc.surroundings.UptakeLine` and its host job."""
    import xarray as xr

    pts = line.points
    n = len(pts)
    X, W, Y = (np.full(n, np.nan) for _ in range(3))
    for i, p in enumerate(pts):
        if p.has_number:
            X[i], W[i], Y[i] = _composition(line, p.s)
    T = np.array([p.T for p in pts])
    host, solute = job.phase, job.solute
    pot = line.potential
    where = f"in {host}" + (" (" + ", ".join(f"u({el}) = {u:g}" for el, u in job.fix) + ")" if job.fix else "")
    statuses = np.array([p.status for p in pts], dtype=object)
    data = {
        "X": ("T", X, {"units": "1", "long_name": f"mole fraction of {solute} {where}"}),
        "W": ("T", W, {"units": "1", "long_name": f"mass fraction of {solute} {where}"}),
        "PPM": ("T", W * 1e6, {"units": "ppm", "long_name": f"{solute} {where}, parts per million by mass"}),
        "Y": ("T", Y, {"units": "1", "long_name": f"site fraction of {solute} on the interstitial sublattice"}),
        "activity": ("T", np.array([p.activity for p in pts]),
                     {"units": "1", "long_name": f"activity of {solute} against {pot.ref_text}"}),
        "MU_SOLUTE": ("T", np.array([p.mu_target for p in pts]),
                      {"units": "J/mol", "long_name": f"chemical potential of {solute} set by the surroundings"}),
        "status": ("T", statuses, {"units": "", "long_name": "ok, metastable, below_limit or failed"}),
        "reason": ("T", np.array([p.reason for p in pts], dtype=object),
                   {"units": "", "long_name": "why the point has no number, or what forms instead"}),
        "forms_instead": ("T", np.array(["+".join(p.forms_instead) for p in pts], dtype=object),
                          {"units": "", "long_name": f"phases more stable than {host} at this potential"}),
        "DF_MAX": ("T", np.array([p.max_df for p in pts]),
                   {"units": "J/mol", "long_name": "largest driving force of another candidate phase"}),
        "MU": (("T", "component"), np.array([p.mu for p in pts]).reshape(n, len(line.elements)),
               {"units": "J/mol", "long_name": f"chemical potentials of {host}"}),
    }
    if surroundings.kind == "atmosphere":
        data["derived"] = ("T", np.array([p.derived for p in pts]), {"units": "1", "long_name": pot.derived_name})
    attrs_extra = {}
    if surroundings.kind == "partial_pressure":
        p = surroundings.value
        KS = X / math.sqrt(p)
        M = float(line.molar_masses[line.elements.index(solute)])
        data["KS_X"] = ("T", KS, {"units": "Pa-1/2", "long_name": "Sieverts constant x / sqrt(p)"})
        data["KS_CM3"] = ("T", W * 100.0 / M / 2.0 * V_STP / math.sqrt(p / _ATM),
                          {"units": "cm3(STP)/(100 g)/atm^1/2",
                           "long_name": f"Sieverts constant, cm3 {solute}2 (273.15 K, 1 atm) per 100 g per sqrt(atm)"})
        data["KS_PPM"] = ("T", W * 1e6 / math.sqrt(p / _BAR),
                          {"units": "ppm/bar^1/2", "long_name": "Sieverts constant, ppm by mass per sqrt(bar)"})
        dH, K0, used = sieverts_fit(T, np.where(statuses == "ok", KS, np.nan), sieverts_range)
        attrs_extra = {"sieverts_enthalpy_J_per_mol": dH, "sieverts_K0_per_sqrt_Pa": K0, "sieverts_fit_points": used,
                       "sieverts_fit_range_K": "all ok points" if sieverts_range is None
                       else f"{sieverts_range[0]:g}-{sieverts_range[1]:g}"}
    coords = {
        "T": ("T", T, {"units": "K", "long_name": "temperature"}),
        "T_C": ("T", T - ZERO_CELSIUS, {"units": "degC", "long_name": "temperature"}),
        "component": ("component", list(line.elements), {"units": "", "long_name": "element"}),
    }
    sur = surroundings
    given = (f"activity {sur.value:g}" if sur.kind == "activity" else
             f"partial pressure of {solute}2 {sur.value:g} Pa" if sur.kind == "partial_pressure" else
             "atmosphere " + ",".join(f"{k}={v:g}" for k, v in sur.atmosphere.pressures.items()) + " Pa")
    attrs = {
        "title": f"uptake of {solute} by {host}",
        **request_attrs(job, line.host),
        "not_checked": ",".join(line.not_checked),
        "surroundings": sur.kind,
        "surroundings_value": given,
        "reference": pot.ref_text,
        "gas_data_source": pot.gas_source,
        "reaction": pot.reaction,
        "gas_mixture": ("equilibrated" if sur.atmosphere.equilibrate else "as given") if sur.atmosphere else "",
        **attrs_extra,
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _num(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def uptake_json(ds) -> dict:
    """The JSON contract of ``solubility uptake --json``: the solvus keys that apply plus activity, forms_instead."""
    has = np.isin(ds["status"].values, ["ok", "metastable"])
    out = {
        "temperature_K": [float(t) for t in ds["T"].values],
        "mole_fraction": [_num(v) for v in ds["X"].values],
        "mass_fraction": [_num(v) for v in ds["W"].values],
        "site_fraction": [_num(v) for v in ds["Y"].values],
        "activity": [_num(v) for v in ds["activity"].values],
        "forms_instead": [str(f).split("+") if f else [] for f in ds["forms_instead"].values],
        "converged": [bool(h) or s == "below_limit" for h, s in zip(has, ds["status"].values, strict=True)],
        "status": [str(v) for v in ds["status"].values],
        "reason": [str(v) for v in ds["reason"].values],
    }
    if "derived" in ds:
        out["derived"] = {"name": ds["derived"].attrs["long_name"], "values": [_num(v) for v in ds["derived"].values]}
    if "KS_X" in ds:
        out["sieverts"] = {
            "per_sqrt_Pa": [_num(v) for v in ds["KS_X"].values],
            "cm3_STP_per_100g_per_sqrt_atm": [_num(v) for v in ds["KS_CM3"].values],
            "ppm_per_sqrt_bar": [_num(v) for v in ds["KS_PPM"].values],
            "enthalpy_J_per_mol": _num(ds.attrs["sieverts_enthalpy_J_per_mol"]),
            "fit_range_K": ds.attrs["sieverts_fit_range_K"],
        }
    for key in ("database", "database_sha256", "phase", "solute", "reference", "gas_data_source", "reaction",
                "gas_mixture", "surroundings", "surroundings_value"):
        out[key] = ds.attrs.get(key)
    return out


def uptake_csv_text(ds) -> str:
    """CSV table, one row per temperature, with a commented header of provenance and the caution."""
    lines = [f"# {k}: {v}" for k, v in ds.attrs.items()]
    cols = ["T", "T_C", "X", "W", "PPM", "Y", "activity", "MU_SOLUTE"]
    cols += [c for c in ("derived", "KS_X", "KS_CM3", "KS_PPM") if c in ds]
    cols += ["status", "forms_instead", "reason"]
    lines.append(",".join(f"{c} [{ds[c].attrs['units']}]" if ds[c].attrs.get("units") else c for c in cols))
    for i in range(ds.sizes["T"]):
        row = []
        for c in cols:
            v = ds[c].values[i]
            if isinstance(v, float | np.floating):
                row.append(repr(float(v)) if math.isfinite(float(v)) else "")
            else:
                text = str(v)
                row.append('"' + text.replace('"', '""') + '"' if ("," in text or '"' in text) else text)
        lines.append(",".join(row))
    return "\n".join(lines) + "\n"


def build_limit_dataset(line, activity, p_x2, k_n, job):
    """Dataset of the surface map's boundary (see `solubility.calc.surroundings.stability_limit`)."""
    import xarray as xr

    T = np.array([p.T for p in line.points])
    solute = job.solute
    data = {
        "activity": ("T", activity, {"units": "1", "long_name": f"activity of {solute} at the host's limit"}),
        "partner": ("T", np.array(["+".join(p.partners) for p in line.points], dtype=object),
                    {"units": "", "long_name": "phase that forms above the limit"}),
        "status": ("T", np.array([p.status for p in line.points], dtype=object),
                   {"units": "", "long_name": "status of the host's limit (host_unstable: not stable at any content)"}),
        "partner_change_T": ("change", np.array([c.T for c in line.changes], dtype=float),
                             {"units": "K", "long_name": "temperature where the forming phase changes"}),
    }
    if np.isfinite(p_x2).any():
        data["p_X2"] = ("T", p_x2, {"units": "Pa", "long_name": f"equivalent pressure of {solute}2 at the limit, Pa"})
    if np.isfinite(k_n).any():
        data["K_N"] = ("T", k_n, {"units": "atm-1/2", "long_name": "nitriding potential at the limit, atm^-1/2"})
    attrs = {"title": f"limit of {job.phase} against {solute} potential", "database": job.database.name,
             "database_sha256": job.database.sha256 or "", "phase": job.phase, "solute": solute,
             **_versions(), "caution": CAUTION}
    return xr.Dataset(data, coords={"T": ("T", T, {"units": "K", "long_name": "temperature"})}, attrs=attrs)
