"""Nitrogen in austenite at 1 atm N2 on the bundled steel database, against measurement.

Reference: R. D. Pehlke and J. F. Elliott, Trans. Metall. Soc. AIME 218 (1960) 1088-1101: nitrogen in gamma
iron at 1 atm N2, about 0.025 wt% at 1273 K (recalled from memory, not looked up). Tolerance 10 %: the scatter
of the measurements and of assessed descriptions around them.
"""

from __future__ import annotations

import warnings

import solubility


def test_nitrogen_in_austenite_pehlke_elliott(steel_db):
    with warnings.catch_warnings():
        # pycalphad's caution about FCC_L12's partitioned magnetic term (a candidate here; see databases/README.md)
        warnings.simplefilter("ignore", UserWarning)
        ds = solubility.uptake(steel_db.db, "FCC_A1", "N", [1273.15], partial_pressure=101325.0, balance="FE")
    assert ds.status.values[0] in ("ok", "metastable")
    assert ds.attrs["gas_data_source"]
    assert abs(100 * ds.W.values[0] / 0.025 - 1) < 0.10
