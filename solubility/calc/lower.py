"""The lower end of the host's single-phase field, and the temperatures where the field opens or closes.

The solvus (`solubility.calc.boundary`) is the upper end of the host's field: the least solute content at which
a solute-richer phase reaches zero driving force. Where another phase is more stable than the host at low solute
content (austenite below the A3 line, where ferrite is more stable at low carbon), the field also has a lower
end: the largest solute content at which a solute-poorer phase (the lower partner) has zero driving force against
the host, every other candidate staying below zero. It is solved exactly as the upper end, by the same safeguarded
Newton iteration in s = ln y (`_Engine.solve_partner` with ``sign=-1``: the lower partner's driving force falls as
the host takes up solute), from a bracket found by walking down the cold scan's ln y grid from the upper end.

Where the two ends meet (the eutectoid for austenite: ferrite, austenite and cementite coexist) the field closes.
That temperature is located, as a change of partner is, by bisection in temperature to `T_TOL`: on the field's
side the lower partner's driving force at the upper boundary is negative, beyond it positive. A field without a
lower end opens or closes at zero solute content (austenite of an alloy at its A3 temperature): located by
bisection on whether the host is stable at the smallest content searched; its composition there is reported as
not a number (zero, below the searched range) and the phase that replaces the host is named.

Where the lower end's partner changes between two temperatures of the line (alpha titanium's lower partner is
beta below the beta + alpha + liquid temperature, the liquid above it), `solubility.calc.boundary.solvus_line`
locates the change to `T_TOL` with the solvus's own `_Engine.locate_change`, called with ``sign=-1``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from solubility.calc.points import FieldEnd

__all__ = ["WALK_START", "FieldEnd", "LowerEnds"]

#: the walk down from the upper end starts this far below it in ln y (a field narrower than that is not resolved)
WALK_START = 1e-4
#: states of the upper end with a field whose lower end is sought
_FIELD = ("ok", "no_partner")


class LowerEnds:
    """The lower end of the field and the field's opening and closing temperatures, for one solvus engine.

    Parameters
    ----------
    engine
        The solvus engine of the line (`solubility.calc.boundary._Engine`); points are its `BoundaryPoint`.
    grid
        The cold scan's ln y grid, ascending.
    y_min, y_max
        Smallest and largest solute site fractions searched.
    t_tol
        Temperature tolerance of a located opening or closing, K.
    """

    def __init__(self, engine, grid: Sequence[float], y_min: float, y_max: float, t_tol: float) -> None:
        self.e = engine
        self.grid = [float(g) for g in grid]
        self.s_min, self.s_max = math.log(y_min), math.log(y_max)
        self.t_tol = t_tol

    # ---------------------------------------------------------------- the lower end at one temperature
    def point(self, T: float, upper, prev):
        """The lower end at T, given the upper end there and the previous lower end of the line (or None).

        Status "ok" (a lower boundary, solved and checked), "no_partner" (the host is stable down to the smallest
        content searched, Y_MIN: no phase limits the field from below), the upper end's status where the host has
        no field (host_unstable, below_limit), or "failed".
        """
        e = self.e
        if upper.status not in _FIELD:
            if upper.status == "failed":
                return e._null(T, "failed", "not computed: the upper end failed")
            return e._null(T, upper.status, upper.reason)
        if e.max_df(self.s_min, T, quick=True)[0] < 0:  # the quick form is exact where negative
            return e._null(T, "no_partner", "")
        s_top = upper.s if upper.valid else self.s_max
        if prev is not None and prev.valid:
            partner = prev.partners[0]
            sol = e.solve_partner(partner, T, prev.s, prev.phase_y.get(partner), sign=-1.0)
            if sol is not None and sol[0] < s_top:
                point = e.finish(T, sol[0], {partner: sol[1]}, prev.phase_y)
                if point.valid:
                    return point
        return self.cold(T, s_top)

    def cold(self, T: float, s_top: float):
        """The lower end below ln y = s_top (the upper end) from nothing: walk down to the first unstable point,
        then solve the crossing between it and the stable point above it."""
        e = self.e
        hi = s_top - WALK_START
        f_hi = e.max_df(hi, T, quick=True)[0]
        if f_hi >= 0:
            return e._null(T, "failed", f"lower end not resolved: the field is narrower than {WALK_START:g} in "
                                        "ln y below its upper end")
        known = {}
        if e.scan is not None and e.scan[0] == T:
            known = {s: v for s, v in zip(e.scan[1], e.scan[2], strict=True)}
        for s in sorted((g for g in self.grid if g < hi), reverse=True):
            f, phase = known[s] if s in known else e.max_df(s, T, quick=True)[:2]
            if f >= 0:
                return self.e._crossing(T, s, hi, phase, sign=-1.0)
            hi = s
        return e._null(T, "no_partner", "")

    # ---------------------------------------------------------------- opening and closing of the field
    def field_end(self, upper, lower, T_out: float) -> FieldEnd:
        """Locate, between the field's point (upper and lower ends at upper.T) and T_out (no field), where the
        host's field opens or closes, to T_TOL."""
        e = self.e
        kind = "closes" if T_out > upper.T else "opens"
        if upper.valid and lower.valid:
            beta, alpha = upper.partners[0], lower.partners[0]
            y_beta, y_alpha = upper.phase_y.get(beta), lower.phase_y.get(alpha)

            def inside(T: float) -> tuple[bool, float]:
                sol = e.solve_partner(beta, T, upper.s, y_beta)
                if sol is None:
                    return False, math.nan
                return e.df(alpha, e.mu(sol[0], T), T, y_alpha).value < 0, sol[0]

            partners = (alpha, beta)
        else:  # no lower end: the field opens or closes at zero solute content, where the host is stable
            def inside(T: float) -> tuple[bool, float]:
                return e.max_df(self.s_min, T, quick=True)[0] < 0, math.nan

            partners = ()
        T_in, s_in = upper.T, upper.s if partners else math.nan
        if not inside(T_in)[0]:
            return FieldEnd(math.nan, kind, partners)
        while abs(T_out - T_in) > self.t_tol:
            mid = 0.5 * (T_in + T_out)
            ok, s = inside(mid)
            if ok:
                T_in, s_in = mid, s
            else:
                T_out = mid
        if not partners:  # the phase that replaces the host at zero solute content
            partners = (e.max_df(self.s_min, T_out, quick=True)[1],)
        return FieldEnd(round(0.5 * (T_in + T_out), 3), kind, partners, s_in)
