"""Ideal interstitial test systems built with the tool, shared by the closed-form checks.

The data are invented (an ideal solution and its partner, not an assessment) and serve as inputs only: the
reference values of the tests that use them come from the closed form and from pycalphad's equilibrium.
"""

from __future__ import annotations

import pytest

from solubility.models.sublattice import SublatticeModel

IDEAL_CASES = [
    # (c, A, B, p, q, partner A, partner B); invented ideal data (labelled: not an assessment)
    pytest.param(3.0, 40000.0, 10.0, 0.0, 1.0, 0.0, 0.0, id="bcc-like 1:3, pure-solute partner (reference)"),
    pytest.param(
        1.0, 30000.0, 0.0, 0.0, 1.0, 2000.0, -1.0, id="fcc-like 1:1, pure-solute partner off reference"
    ),
    pytest.param(3.0, 60000.0, 0.0, 3.0, 1.0, -15000.0, 0.0, id="1:3 against a stoichiometric M3X"),
    pytest.param(0.5, 10000.0, 5.0, 2.0, 1.0, -4000.0, -1.0, id="hcp-like 1:0.5 against M2X"),
]


def ideal_db(c, A, B, p, q, GA, GB):
    from solubility.databases.reader import _parse_text

    m = SublatticeModel.from_ratios("SS", "FE", "C", a=1.0, c=c)
    # invented reference data (mass of FE and C from the bundled fe-c ELEMENT lines; H298/S298 unused here)
    els = {"FE": ("SS", 55.847, 0.0, 0.0), "C": ("PARTNER", 12.011, 0.0, 0.0)}
    text = m.tdb_block({"G(SS,FE:VA;0)": "0", "G(SS,FE:C;0)": f"{A}+{B}*T"}, elements=els)
    if p == 0:
        text += f" PHASE PARTNER % 1 {q} !\n CONSTITUENT PARTNER :C: !\n"
        text += f" PARAMETER G(PARTNER,C;0) 298.15 {GA / q}+{GB / q}*T; 6000 N !\n"
    else:
        text += f" PHASE PARTNER % 2 {p} {q} !\n CONSTITUENT PARTNER :FE:C: !\n"
        text += f" PARAMETER G(PARTNER,FE:C;0) 298.15 {GA}+{GB}*T; 6000 N !\n"
    db, _ = _parse_text(text, "ideal test system")
    return db
