"""Site choices compared: the same data fitted under several site families and blockings of one host phase.

Each choice (a site family of the lattice and a blocked fraction b) gives the interstitial site ratio
``c = a n (1 - b)`` (`solubility.models.sublattice.SublatticeModel.from_structure`). The base database's phase is
re-expressed for that c (`solubility.calc.model_file`): the parameters without the solute (G(M:VA), TC, BMAGN)
are kept, TC(M:X) and BMAGN(M:X) map exactly (`solubility.models.site_ratio`), the free expression, in which
``{c}`` stands for the choice's c, gives G(M:X), and the interactions G(M:X,VA;k) are set to zero (they belong to
one site ratio; the names of those dropped are reported). Every choice is thus the plain geometric model with a
fitted end-member, and the fits are set side by side with chi2, AIC and BIC.

In the dilute limit the site count only shifts G(M:X) per mole of solute by the temperature-linear term
``R T ln(c'/c)`` (ln x = ln(c/a) + (mu_X - G(M:X)/c) / (R T) + O(x)), which a free ``B T`` term absorbs: the
fits are then equal to order x and the data cannot tell the choices apart. Only data concentrated enough for the
site count or the blocking to bend ln x away from the dilute form can. `verdict` says which case holds, from the
fit quality alone.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from solubility.constants import R
from solubility.errors import InputError

__all__ = ["EQUAL_CHI2_REL", "SiteChoice", "SiteComparison", "comparison_table", "site_database_text", "structure_of",
           "verdict"]

#: relative agreement of chi2 always counted as equal (rounding of the engines)
EQUAL_CHI2_REL = 1e-6
#: generous bound of the coefficient of the order-x term of ln x between two site choices (it is of order
#: 1 + a/c: the ideal entropy's expansion ln(y / (1 - y)) with y = a x / (c (1 - x)))
ORDER_X_COEFFICIENT = 10.0
#: AIC differences below this give no preference (Burnham and Anderson, Model Selection and Multimodel
#: Inference, 2nd ed., Springer 2002, section 2.6: below 2 "substantial support" for both; above 10 essentially none)
DELTA_AIC_NONE, DELTA_AIC_STRONG = 2.0, 10.0
_LATTICE_OF_PHASE = (("BCC", "bcc"), ("FCC", "fcc"), ("HCP", "hcp"), ("DIAMOND", "diamond"), ("SC_", "sc"))


@dataclass(frozen=True)
class SiteChoice:
    """A site family (kind) and a blocked fraction b (0 <= b < 1)."""

    kind: str
    blocking: float = 0.0

    @classmethod
    def parse(cls, text: str) -> SiteChoice:
        """From ``KIND`` or ``KIND:BLOCKING`` (e.g. ``octahedral``, ``tetrahedral:0.5``)."""
        kind, sep, b = str(text).partition(":")
        if not kind.strip():
            raise InputError(f"site choice {text!r} is not KIND or KIND:BLOCKING, e.g. octahedral or tetrahedral:0.5")
        blocking = 0.0
        if sep:
            try:
                blocking = float(b)
            except ValueError:
                raise InputError(f"site choice {text!r}: blocking {b!r} is not a number (0 <= B < 1)") from None
            if not (math.isfinite(blocking) and 0.0 <= blocking < 1.0):
                raise InputError(f"site choice {text!r}: blocking {b!r} is outside 0 <= B < 1")
        return cls(kind.strip().lower(), blocking)

    @property
    def label(self) -> str:
        return self.kind if self.blocking == 0.0 else f"{self.kind} b={self.blocking:g}"


def structure_of(phase: str) -> str:
    """The built-in lattice of a phase name (BCC_A2 -> bcc); InputError when the name does not say."""
    for prefix, lattice in _LATTICE_OF_PHASE:
        if phase.upper().startswith(prefix):
            return lattice
    raise InputError(f"the lattice of phase {phase} is not known from its name; give --structure (fcc, bcc, hcp, "
                     "sc, diamond or a structure file)")


def site_database_text(database: Any, phase: str, host: str, solute: str, structure: str,
                       choice: SiteChoice) -> tuple[str, float, list[str]]:
    """The base database with `phase` re-expressed for the choice (module docstring), its c, the dropped keys."""
    from solubility.calc.fitting import database_text
    from solubility.calc.model_file import model_database_text
    from solubility.models.sublattice import SublatticeModel
    from solubility.models.tdb_commands import parameters_of
    from solubility.models.tdb_writer import with_parameter

    model = SublatticeModel.from_structure(phase, [host], [solute], structure, choice.kind, blocking=choice.blocking)
    text, _ = model_database_text(model, {}, base=database)

    def interactions(source: str) -> list[str]:
        return [k for k in parameters_of(source, phase) if k.startswith("G(")
                and set(k.split(",", 1)[1].rsplit(";", 1)[0].split(":")[-1].split(",")) == {solute, "VA"}]

    for key in interactions(text):
        text = with_parameter(text, key, "0")
    return text, float(model.c), interactions(database_text(database))


def _equal(results: Sequence[Any]) -> bool:
    """Whether the fits are equal because the data are dilute for their precision.

    Between two site choices ln x differs by terms of order x once G(M:X) is refitted: d_i <= k x_i / sigma_i in
    units of the points' uncertainty (k = `ORDER_X_COEFFICIENT`; sigma_i the given sigma_rel, or the fit's scatter
    for unweighted data). Those terms can move chi2 (in the same units) by at most 2 |r| |d| + |d|^2. When that
    bound is below 1 (no choice can gain one unit of chi2: the data cannot tell them apart in principle) and the
    fits' chi2 indeed differ by less than it, the fits are equal.
    """
    import numpy as np

    chi2 = np.array([r.chi2 for r in results])
    data = results[0].data
    unit = 1.0 if data.weighted else max(float(chi2.min()), 1e-300) / max(results[0].dof, 1)
    d = ORDER_X_COEFFICIENT * data.x / (data.sigma_rel * math.sqrt(unit))
    d2 = float(d @ d)
    bound = 2.0 * math.sqrt(float(chi2.max()) / unit * d2) + d2
    return bound < 1.0 and float(chi2.max() - chi2.min()) / unit <= bound + EQUAL_CHI2_REL * float(chi2.max()) / unit


def verdict(labels: Sequence[str], results: Sequence[Any], c_values: Sequence[float]) -> tuple[str, str]:
    """(code, sentence): whether the data tell the site choices apart, from chi2 and AIC.

    Codes: ``equal`` (the fits are equal: the dilute limit), ``indistinguishable`` (delta AIC < 2 for all),
    ``preferred`` (one choice has the lowest AIC by at least 2).
    """
    chi2 = [r.chi2 for r in results]
    aic = [r.aic for r in results]
    best = min(range(len(aic)), key=aic.__getitem__)
    others = sorted(a - aic[best] for i, a in enumerate(aic) if i != best)
    if _equal(results):
        shifts = ", ".join(f"{labels[i]}: R ln({c_values[i]:g}/{c_values[0]:g}) = "
                           f"{R * math.log(c_values[i] / c_values[0]):+.4g} J/(mol K)" for i in range(1, len(labels)))
        return "equal", ("The data cannot tell these site choices apart: the fits are equal to order x (chi2 "
                         f"{' vs '.join(f'{c:.6g}' for c in chi2)}). In the dilute limit the site count only shifts "
                         "G(M:X) per mole of solute by the temperature-linear term R T ln(c'/c), which the fitted "
                         f"parameters absorb ({shifts}).")
    if not others or others[0] < DELTA_AIC_NONE:
        return "indistinguishable", ("The data cannot tell these site choices apart: every AIC lies within "
                                     f"{DELTA_AIC_NONE:g} of the lowest ({labels[best]}), though the fits differ.")
    strength = "strongly " if others[0] > DELTA_AIC_STRONG else ""
    return "preferred", (f"The data {strength}favour {labels[best]}: the next choice's AIC is higher by "
                         f"{others[0]:.3g} (above {DELTA_AIC_NONE:g}: some support; above {DELTA_AIC_STRONG:g}: "
                         "essentially none, Burnham and Anderson 2002).")


def comparison_table(labels: Sequence[str], results: Sequence[Any], c_values: Sequence[float]) -> str:
    """The fits side by side: one column per site choice; parameters (value ± stderr), chi2, AIC, BIC, dAIC."""
    names = sorted({n for r in results for n in r.names})
    head = [f"{lab} (c={c:g})" for lab, c in zip(labels, c_values, strict=True)]
    width = max(26, *(len(h) + 2 for h in head))
    aic0 = min(r.aic for r in results)
    rows = [f"{'':<12}" + "".join(f"{h:>{width}}" for h in head)]
    for n in names:
        cells = []
        for r in results:
            i = r.names.index(n) if n in r.names else -1
            cells.append("-" if i < 0 else f"{r.values[i]:.8g} ± {r.stderr[i]:.2g}")
        rows.append(f"{n:<12}" + "".join(f"{c:>{width}}" for c in cells))
    for label, get in (("chi2", lambda r: f"{r.chi2:.5g}"), ("n_points", lambda r: str(r.n_points)),
                       ("AIC", lambda r: f"{r.aic:.5g}"), ("BIC", lambda r: f"{r.bic:.5g}"),
                       ("dAIC", lambda r: f"{r.aic - aic0:.3g}"), ("converged", lambda r: str(r.converged))):
        rows.append(f"{label:<12}" + "".join(f"{get(r):>{width}}" for r in results))
    return "\n".join(rows)


@dataclass
class SiteComparison:
    """Fits of the same data under several site choices, with the verdict."""

    choices: tuple[SiteChoice, ...]
    c_values: tuple[float, ...]
    results: tuple[Any, ...]
    structure: str

    @property
    def labels(self) -> list[str]:
        return [c.label for c in self.choices]

    def verdict(self) -> tuple[str, str]:
        return verdict(self.labels, self.results, self.c_values)

    def table(self) -> str:
        return comparison_table(self.labels, self.results, self.c_values)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe: one entry per site choice (site, blocking, c, the fit's dict) and the verdict."""
        code, text = self.verdict()
        aic0 = min(r.aic for r in self.results)
        fits = [{"site": ch.kind, "blocking": ch.blocking, "c": c, "delta_aic": r.aic - aic0, **r.to_dict()}
                for ch, c, r in zip(self.choices, self.c_values, self.results, strict=True)]
        return {"structure": self.structure, "fits": fits, "verdict": code, "verdict_text": text}
