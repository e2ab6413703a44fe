"""A change of partner along the lower end of the host's field, located in temperature, on the bundled steel database.

Case: nitrogen in alpha titanium (HCP_A3, (Ti)1(N,VA)0.5) of the bundled `steel` database (mf-steel, Ti-N as it
compiles). Alpha is the nitrogen-rich solid solution; at low nitrogen beta (BCC_A2) is more stable below the
three-phase temperature beta + alpha + liquid, and the liquid above it, so the lower end's partner changes from
BCC_A2 to LIQUID between 2100 K and 2200 K (the tool locates it near 2191.3 K). The bundled `fe-c` database has no
such case: austenite's lower partner is ferrite (alpha, then delta) wherever it has one (test_lower_end.py).

References: pycalphad's own equilibrium (reference library, pycalphad 0.11.x), computed here at test time.
- At the located temperature -0.5 K and +0.5 K, at an overall composition just below alpha's lower boundary
  (95 % of its nitrogen content at the change), pycalphad's equilibrium over all the tool's candidate phases holds
  alpha with beta below and alpha with the liquid above. Ordered phases whose disordered part is the same phase
  (pycalphad's ``disordered_phase`` model hint, e.g. HCP_L12 over HCP_A3) are counted as that phase: their Gibbs
  energies are the disordered ones where they are disordered.
- The three-phase temperature computed independently: pycalphad's equilibrium at that overall composition,
  bisected in temperature between 2100 K and 2200 K on whether the liquid is present, to 0.01 K, over the phases
  the full equilibrium shows on either side (HCP_A3, BCC_A2, LIQUID). The tool locates its change to 0.01 K
  (a bracket of 0.005 K); agreement within 0.05 K.
- The alpha composition at the change lies between pycalphad's alpha compositions at -0.5 K and +0.5 K.
"""

from __future__ import annotations

import io
import json
import warnings

import numpy as np
import pytest
from pycalphad import equilibrium
from pycalphad import variables as v

import solubility
from solubility.databases.reader import load_database
from solubility.results.dataset import csv_text, solvus_json
from solubility.results.table import solvus_table

TEMPERATURES = [2100.0, 2200.0]


@pytest.fixture(scope="module")
def alpha_ti():
    with warnings.catch_warnings():
        # the steel file's own warnings about Ti-N (an ionic liquid left out, an ordered FCC left out, a missing
        # end-member, a misspelt function; databases/README.md) and pycalphad's caution on partitioned magnetism
        warnings.simplefilter("ignore")
        return solubility.solvus("steel", "HCP_A3", "N", TEMPERATURES, balance="TI")


def _phases(T: float, x_n: float, phases) -> dict[str, float]:
    """pycalphad's equilibrium of Ti-N at T (K) and x(N): {phase (ordered ones by their disordered part): x(N)}."""
    db = load_database("steel").db
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        eq = equilibrium(db, ["TI", "N", "VA"], list(phases), {v.T: T, v.P: 101325, v.N: 1, v.X("N"): x_n})
    names = [str(n) for n in eq.Phase.values.ravel()]
    x = eq.X.sel(component="N").values.reshape(len(names), -1)[:, 0]
    return {db.phases[n].model_hints.get("disordered_phase", n): float(xn)
            for n, xn in zip(names, x, strict=True) if n}


def test_lower_partner_change_located(alpha_ti):
    assert list(alpha_ti.status_low.values) == ["ok", "ok"]
    assert list(alpha_ti.partner_low.values) == ["BCC_A2", "LIQUID"]
    assert alpha_ti.sizes["change_low"] == 1
    assert alpha_ti.partner_low_below.values[0] == "BCC_A2" and alpha_ti.partner_low_above.values[0] == "LIQUID"
    for name in ("partner_low_change_T", "partner_low_change_X", "partner_low_change_W", "partner_low_change_PPM",
                 "partner_low_below", "partner_low_above"):
        assert {"units", "long_name"} <= set(alpha_ti[name].attrs), name
    assert alpha_ti.partner_low_change_T.attrs["units"] == "K"
    T_c = float(alpha_ti.partner_low_change_T.values[0])
    x_c = float(alpha_ti.partner_low_change_X.values[0])
    assert 2100.0 < T_c < 2200.0
    # the host's corner of the three-phase triangle lies on the lower end: between the two computed lower ends
    assert float(alpha_ti.X_LOW.values[0]) < x_c < float(alpha_ti.X_LOW.values[1])

    # pycalphad's own equilibrium, all candidates, just below alpha's lower boundary: the lower partners differ
    x_ov = 0.95 * x_c
    below = _phases(T_c - 0.5, x_ov, alpha_ti.attrs["candidates"].split(","))
    above = _phases(T_c + 0.5, x_ov, alpha_ti.attrs["candidates"].split(","))
    assert sorted(below) == ["BCC_A2", "HCP_A3"]
    assert sorted(above) == ["HCP_A3", "LIQUID"]
    assert below["HCP_A3"] < x_c < above["HCP_A3"]

    # the three-phase temperature by bisection of pycalphad's equilibrium phase sets, independent of the tool
    phases = ["HCP_A3", "BCC_A2", "LIQUID"]
    lo, hi = TEMPERATURES
    assert "LIQUID" not in _phases(lo, x_ov, phases) and "LIQUID" in _phases(hi, x_ov, phases)
    while hi - lo > 0.01:
        mid = 0.5 * (lo + hi)
        if "LIQUID" in _phases(mid, x_ov, phases):
            hi = mid
        else:
            lo = mid
    assert abs(T_c - 0.5 * (lo + hi)) <= 0.05


def test_lower_partner_change_in_the_outputs(alpha_ti):
    T_c = float(alpha_ti.partner_low_change_T.values[0])
    table = solvus_table(alpha_ti)
    assert f"lower end's partner changes at {T_c:.2f} K" in table
    assert "BCC_A2 below, LIQUID above" in table
    out = solvus_json(alpha_ti)
    (change,) = out["lower_partner_changes"]
    assert change["temperature_K"] == T_c and change["below"] == ["BCC_A2"] and change["above"] == ["LIQUID"]
    assert change["mole_fraction"] == float(alpha_ti.partner_low_change_X.values[0])
    json.dumps(out)  # JSON-safe
    text = csv_text(alpha_ti)
    (line,) = [ln for ln in text.splitlines() if ln.startswith("# lower_partner_change:")]
    assert f"T [K] {T_c!r}" in line and "BCC_A2 below, LIQUID above" in line
    # the solvus's own partner changes stay where they were, along `change`
    assert alpha_ti.sizes["change"] == 0 and out["partner_changes"] == []
    # the figure marks it beside the solvus's changes, and the lower end's dashed runs reach it from both sides
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from solubility.results.plotting import plot_solvus

    ax = plot_solvus(alpha_ti, units="x")
    assert any(t.get_text().startswith("lower end ") and "BCC_A2 → LIQUID" in t.get_text() for t in ax.texts)
    x_c = float(alpha_ti.partner_low_change_X.values[0])
    dashed = [ln for ln in ax.get_lines() if ln.get_linestyle() == "--"]
    assert len(dashed) == 2 and all(np.any(np.isclose(ln.get_xdata(), x_c, rtol=1e-12)) for ln in dashed)
    plt.close(ax.figure)
    # NetCDF round trip keeps the new dimension
    import xarray as xr

    from solubility.results.dataset import netcdf_bytes

    back = xr.open_dataset(io.BytesIO(netcdf_bytes(alpha_ti)), engine="h5netcdf")
    assert np.array_equal(back.partner_low_change_T.values, alpha_ti.partner_low_change_T.values)
