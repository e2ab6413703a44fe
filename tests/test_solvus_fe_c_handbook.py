"""The Fe-C diagram of the handbook, computed on the bundled Fe-C database.

Reference: H. Okamoto, "The C-Fe (carbon-iron) system", J. Phase Equilib. 13 (1992) 543-565 (the assessed
handbook diagram; values below as quoted there, from memory of its invariant table):
metastable (Fe-Fe3C) eutectoid 727 C, maximum C in ferrite 0.022 wt% at that eutectoid, maximum C in austenite
2.14 wt% at the metastable eutectic 1147 C; stable (Fe-graphite) eutectoid 738 C.

The bundled database is a later assessment (Hallstedt et al., Calphad 34 (2010) 129) fitted to its own choice of
data, so it reproduces the handbook only to within that fit. Tolerances: invariant temperatures +-3 K (the
scatter of the measured eutectoid and eutectic temperatures the assessments weigh); maximum C in ferrite
+-0.004 wt% (ferrite solubility data near the eutectoid differ by about 20 %); maximum C in austenite
+-0.15 wt% (the scatter of the measured Acm line near the eutectic).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import solubility

METASTABLE = ["GRAPHITE", "DIAMOND_A4"]


@pytest.fixture(scope="module")
def ferrite_metastable():
    return solubility.solvus("fe-c", "BCC_A2", "C", "950:1010:10", exclude=METASTABLE)


@pytest.fixture(scope="module")
def austenite_metastable():
    return solubility.solvus("fe-c", "FCC_A1", "C", "1400:1440:10", exclude=METASTABLE)


def _change(ds, below: str, above: str) -> tuple[float, float]:
    for T, x, b, a in zip(ds.partner_change_T.values, ds.partner_change_W.values, ds.partner_below.values,
                          ds.partner_above.values, strict=True):
        if b == below and a == above:
            return float(T), float(x)
    raise AssertionError(f"no change {below} -> {above} in {ds.partner_below.values} / {ds.partner_above.values}")


def test_metastable_eutectoid_temperature(ferrite_metastable):
    T, _ = _change(ferrite_metastable, "CEMENTITE_D011", "FCC_A1")
    assert abs((T - 273.15) - 727.0) <= 3.0  # Okamoto 1992: 727 C


def test_maximum_carbon_in_ferrite(ferrite_metastable):
    _, w = _change(ferrite_metastable, "CEMENTITE_D011", "FCC_A1")
    assert abs(100 * w - 0.022) <= 0.004  # Okamoto 1992: 0.022 wt% at the eutectoid
    # it is the maximum of the line: every computed point lies below it
    assert np.nanmax(ferrite_metastable.W.values) < w


def test_metastable_eutectic_and_maximum_carbon_in_austenite(austenite_metastable):
    T, w = _change(austenite_metastable, "CEMENTITE_D011", "LIQUID")
    assert abs((T - 273.15) - 1147.0) <= 3.0  # Okamoto 1992: 1147 C
    assert abs(100 * w - 2.14) <= 0.15  # Okamoto 1992: 2.14 wt%


def test_stable_eutectoid_temperature():
    ds = solubility.solvus("fe-c", "BCC_A2", "C", "1000:1020:10", exclude=["DIAMOND_A4"])
    T, _ = _change(ds, "GRAPHITE", "FCC_A1")
    assert abs((T - 273.15) - 738.0) <= 3.0  # Okamoto 1992: 738 C


def test_graphite_is_the_stable_partner_and_cementite_metastable():
    # common practice, no source: graphite is the stable carbon-rich phase of Fe-C at ambient pressure, and
    # the ferrite solvus against graphite lies below that against cementite (cementite is metastable)
    stable = solubility.solvus("fe-c", "BCC_A2", "C", [800.0], exclude=["DIAMOND_A4"])
    meta = solubility.solvus("fe-c", "BCC_A2", "C", [800.0], exclude=METASTABLE)
    assert stable.partner.values[0] == "GRAPHITE"
    assert meta.partner.values[0] == "CEMENTITE_D011"
    assert stable.X.values[0] < meta.X.values[0]


def test_host_not_stable_gives_no_number():
    # common practice, no source: pure iron is austenite (FCC) between 912 C and 1394 C, and carbon widens
    # the austenite field, so ferrite is not stable at 1250 K at any carbon content
    ds = solubility.solvus("fe-c", "BCC_A2", "C", [1250.0], exclude=METASTABLE)
    assert ds.status.values[0] == "host_unstable"
    assert math.isnan(ds.X.values[0]) and math.isnan(ds.W.values[0]) and math.isnan(ds.Y.values[0])
    assert ds.partner.values[0] == ""
    assert "not stable" in ds.reason.values[0]
    assert bool(ds.converged.values[0])  # a definite answer, not a failure
