"""Terminal solubility of an interstitial solute in a host phase against temperature: the exact solvus.

At each temperature the host phase (hosts)a(X,VA)c is held at the given contents of its other elements
(u-fractions) and its solute content is varied. The solvus is the upper end of the host's single-phase field:
the smallest solute content at which some other phase (the partner) has zero driving force against the host's
chemical potentials, every other candidate phase staying below zero. The partner is found at every temperature
from the driving forces of all candidate phases, never assumed.

Numerics. The solute site fraction y enters as s = ln y, and the host's chemical potentials are evaluated from
its own Gibbs energy at that composition (`solubility.calc.host.host_potentials`), never taken from a global
solver; the driving forces of the other candidates come from `solubility.calc.host.refine`. The boundary
condition DF_partner(mu(s)) = 0 is solved by a safeguarded Newton iteration in s, so the relative accuracy of the
composition is the same at x = 1e-3 and at x = 1e-15. Along a line of temperatures each point starts from the
last; a change of partner is detected by the check of all candidates and located by a root search in
temperature to 0.01 K.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np

from solubility.calc.host import DF_TOL, REFINE_MARGIN, HostRequest, host_potentials, refine
from solubility.calc.partners import partner_names, relabel
from solubility.calc.points import BoundaryPoint, PartnerChange, SolvusLine
from solubility.constants import R

__all__ = ["BoundaryPoint", "PartnerChange", "SolvusLine", "solvus_line"]

#: smallest solute site fraction searched; a solubility below it is flagged, not returned as a number
Y_MIN = 1e-30
#: largest solute site fraction searched (the interstitial sublattice is then practically full)
Y_MAX = 1.0 - 1e-9
#: a cold start looks for a single-phase field narrower than its scan spacing only where the least unstable scan
#: point is within this many RT of stability (between scan points F(s) changes by a fraction of RT)
NARROW_SEARCH = 0.5
#: largest relative residual of the host's tangent-plane solve accepted (above it the host's constitution is not
#: fixed by its composition and its chemical potentials are not defined)
MU_RESIDUAL = 1e-9
#: temperature tolerance for locating a change of partner, K
T_TOL = 0.005
#: ln(y) grid of the cold scan: one point a decade below y = 1e-6 (a single-phase field that narrow at such
#: dilution is not expected), eight a decade above it, and a linear run up to a full sublattice. A host field
#: narrower than a factor of 1.33 in solute content above y = 1e-6 can be missed by a cold start.
_SCAN = np.log(np.unique(np.concatenate((
    np.logspace(math.log10(Y_MIN), -6, 25),
    np.logspace(-6, math.log10(0.5), 47),
    np.linspace(0.5, Y_MAX, 9),
))))


class _Engine:
    """Boundary solver for one host request (one compiled system at one pressure and parameter set)."""

    def __init__(self, req: HostRequest) -> None:
        self.req = req
        self.system = req.view if req.view is not None else req.system
        self.host = req.host
        self.others = tuple(p for p in self.system.phases if p != req.host.phase)
        self.margin = dict.fromkeys(self.others, REFINE_MARGIN)
        self.scan: tuple[float, list[float], list] | None = None  # (T, ln y grid, [(F, phase)]) of the last cold

    # ---------------------------------------------------------------- primitives
    def mu(self, s: float, T: float) -> np.ndarray:
        mu, residual = host_potentials(self.req, s, T)
        if not np.all(np.isfinite(mu)):
            raise FloatingPointError(f"the Gibbs energy of {self.host.phase} is not a finite number at "
                                     f"y({self.host.solute}) = {math.exp(s):.6g}, T = {T:g} K")
        if residual > MU_RESIDUAL:
            raise ArithmeticError(f"the host's chemical potentials have a residual of {residual:.2g} "
                                  f"(above {MU_RESIDUAL:g}) at y({self.host.solute}) = {math.exp(s):.6g}")
        if hasattr(self.system, "set_host"):
            self.system.set_host(self.host.y(s))
        return mu

    def df(self, phase: str, mu: np.ndarray, T: float, y0: np.ndarray | None):
        if y0 is None:
            y0 = self.system.screen(mu, T, [phase])[phase][1]
        return self.system.driving_force(phase, mu, T, y0)

    def all_df(self, mu: np.ndarray, T: float, hints: Mapping[str, np.ndarray] | None = None,
               quick: bool = False) -> dict:
        """Driving force of every non-host candidate at `mu` (`solubility.calc.host.refine`, with the margins
        this line has learnt). Returns {phase: DrivingForce}."""
        return refine(self.system, self.others, mu, T, hints, self.margin, quick)

    # ---------------------------------------------------------------- boundary with a known partner
    def solve_partner(self, phase: str, T: float, s0: float, y0: np.ndarray | None,
                      bracket: tuple[float, float] | None = None, sign: float = 1.0):
        """Solve DF_phase(mu(s)) = 0 for s by safeguarded Newton; returns (s, DrivingForce) or None.

        The slope dDF/ds = x_phase . dmu/ds (envelope theorem: the partner's constitution is optimal), with
        dmu/ds from a forward difference of the host's potentials. `sign` +1: DF rises with s (an upper
        boundary, a solute-rich partner); -1: DF falls with s (a lower boundary, `solubility.calc.lower`).
        """
        lo_s, hi_s = math.log(Y_MIN), math.log(Y_MAX)
        lo, hi = bracket if bracket is not None else (None, None)  # sign * F(lo) < 0 < sign * F(hi)
        s = min(max(s0, lo_s), hi_s)
        y_part = y0
        for _ in range(60):
            mu = self.mu(s, T)
            res = self.df(phase, mu, T, y_part)
            f, y_part = sign * res.value, res.y
            if abs(f) < 1e-9:
                break
            if f < 0:
                lo = s if lo is None or s > lo else lo
            else:
                hi = s if hi is None or s < hi else hi
            h = 1e-6 if s + 1e-6 <= hi_s else -1e-6
            slope = sign * float(res.x @ (self.mu(s + h, T) - mu)) / h
            step = -f / slope if slope > 0 else (2.0 if f < 0 else -2.0)
            s_new = s + max(-5.0, min(5.0, step))
            if lo is not None and hi is not None and not (lo < s_new < hi):
                s_new = 0.5 * (lo + hi)
            s_new = min(max(s_new, lo_s), hi_s)
            if s_new == s and s in (lo_s, hi_s):
                return None  # no root inside the searched range
            done = abs(s_new - s) < 1e-12
            s = s_new
            if done:
                res = self.df(phase, self.mu(s, T), T, y_part)
                break
        else:
            return None
        if abs(res.value) > DF_TOL or not res.converged:
            return None
        return s, res

    # ---------------------------------------------------------------- checks and full solves
    def finish(self, T: float, s: float, partner_res: Mapping[str, object],
               prev_hints: Mapping[str, np.ndarray] | None = None) -> BoundaryPoint:
        """Check every candidate at the boundary s and build the point."""
        mu = self.mu(s, T)
        hints = dict(prev_hints or {})
        hints.update({p: r.y for p, r in partner_res.items()})
        dfs = self.all_df(mu, T, hints)
        partners = tuple(sorted(p for p, d in dfs.items() if abs(d.value) <= DF_TOL))
        others = [d.value for p, d in dfs.items() if p not in partners]
        max_other = max(others) if others else -math.inf
        phase_y = {p: d.y for p, d in dfs.items()}
        if not partners:
            return BoundaryPoint(T, s, (), mu, "failed", "no partner at zero driving force", phase_y, max_other)
        if max_other > DF_TOL:
            return BoundaryPoint(T, s, partners, mu, "failed", "another phase is more stable at the boundary",
                                 phase_y, max_other)
        if not all(dfs[p].converged for p in partners):
            return BoundaryPoint(T, s, partners, mu, "failed", "partner constitution did not converge",
                                 phase_y, max_other)
        return BoundaryPoint(T, s, partners, mu, "ok", "", phase_y, max_other)

    def max_df(self, s: float, T: float, quick: bool = False,
               hints: Mapping[str, np.ndarray] | None = None) -> tuple[float, str, dict]:
        """F(s): the largest driving force of another phase against the host at ln(y) = s (see `all_df`)."""
        dfs = self.all_df(self.mu(s, T), T, hints, quick=quick)
        phase = max(dfs, key=lambda p: dfs[p].value)
        return dfs[phase].value, phase, dfs

    def cold(self, T: float) -> BoundaryPoint:
        """Solve at T from nothing: scan the host's solute content, then solve the first crossing.

        F(s) = max over other phases of the driving force against the host at ln(y) = s; the host is stable
        where F < 0. If no scan point is stable, F is minimised around the least unstable point before the
        host is declared unstable, so a single-phase field narrower than the scan spacing is still found.
        """
        grid = [float(g) for g in _SCAN]
        scans = []
        for s in grid:  # up to the end of the first stable run (all of it when nothing is stable)
            # each point starts the phases' optimisations from their optima at the point before
            scans.append(self.max_df(s, T, quick=True, hints={p: d.y for p, d in scans[-1][2].items()}
                                     if scans else None))
            if scans[-1][0] >= 0 and any(f < 0 for f, _, _ in scans[:-1]):
                break
        grid = grid[:len(scans)]
        values = [v[:2] for v in scans]
        self.scan = (T, grid, values)  # kept for the lower end of the field (`solubility.calc.lower`)
        stable = [f < 0 for f, _ in values]
        if not stable[0] and self._solute_rich(scans[0]):
            # already at the smallest content searched a phase richer in solute beats the host: the boundary
            # lies below Y_MIN (a higher stable run, on the far side of that phase, is another field)
            return self._null(T, "below_limit", f"solubility of {self.host.solute} in {self.host.phase} is below "
                                                f"the searched limit (site fraction {Y_MIN:g})")
        if not any(stable):
            found = None
            if min(f for f, _ in values) < NARROW_SEARCH * R * T:
                found = self._narrow_field(T, grid, values)
            if found is None:
                least = min(range(len(grid)), key=lambda k: values[k][0])
                return self._null(T, "host_unstable",
                                  f"host phase {self.host.phase} is not stable at any {self.host.solute} content "
                                  f"({values[least][1]} is more stable)")
            k, s_stable = found
            grid.insert(k + 1, s_stable)
            values.insert(k + 1, self.max_df(s_stable, T)[:2])
            stable = [f < 0 for f, _ in values]
        i = stable.index(True)
        while i + 1 < len(stable) and stable[i + 1]:
            i += 1
        if i + 1 == len(stable):
            return self._null(T, "no_partner", f"no partner phase: {self.host.phase} takes {self.host.solute} "
                                               "up to a full interstitial sublattice")
        return self._crossing(T, grid[i], grid[i + 1], values[i + 1][1])

    def _solute_rich(self, scan) -> bool:
        """Whether the most stable other phase of a scan point holds more solute than the host there."""
        _, phase, dfs = scan
        k = self.system.elements.index(self.host.solute)
        x_phase = (self.system.phases[phase].moles @ dfs[phase].y)
        return bool(x_phase[k] / x_phase.sum() > 1e-6)

    def _narrow_field(self, T: float, grid: list[float], values: list) -> tuple[int, float] | None:
        """A stable point between the scan points around the two least unstable ones, or None.

        F is minimised with the quick form of `max_df`, which is exact wherever F < 0 and a lower bound of a
        positive F elsewhere, so a stable point it finds is a true one.
        """
        from scipy.optimize import minimize_scalar

        order = sorted(range(1, len(grid) - 1), key=lambda k: values[k][0])[:2]
        for k in order:
            res = minimize_scalar(lambda s: self.max_df(s, T, quick=True)[0], bounds=(grid[k - 1], grid[k + 1]),
                                  method="bounded", options={"xatol": 1e-5})
            if res.fun < 0:
                return (k if res.x > grid[k] else k - 1), float(res.x)
        return None

    def _crossing(self, T: float, lo: float, hi: float, partner: str, sign: float = 1.0) -> BoundaryPoint:
        """The crossing in (lo, hi) where max DF changes sign: the first from negative to positive (the upper end
        of the host's field, ``sign = 1``) or the last from positive to negative (its lower end, ``sign = -1``)."""
        which = "" if sign > 0 else "lower "
        for _ in range(len(self.others) + 1):
            sol = self.solve_partner(partner, T, 0.5 * (lo + hi), None, bracket=(lo, hi), sign=sign)
            if sol is None:
                return self._null(T, "failed", f"{which}boundary with {partner} did not converge")
            s, res = sol
            point = self.finish(T, s, {partner: res})
            if point.converged or point.reason != "another phase is more stable at the boundary":
                return point
            # another phase is more stable at s: the boundary lies beyond it (below s for the upper end, above s
            # for the lower end), against that phase
            _, partner, _ = self.max_df(s, T)
            if sign > 0:
                hi = s
            else:
                lo = s
        return self._null(T, "failed", f"no consistent {'first' if sign > 0 else 'lower'} crossing found")

    def warm(self, T: float, prev: BoundaryPoint, before: BoundaryPoint | None = None) -> BoundaryPoint:
        """Solve at T starting from the previous point(s) of the line; a cold solve where that fails."""
        partner = prev.partners[0]
        s0 = prev.s
        if before is not None and before.valid and before.partners == prev.partners and before.T != prev.T:
            # ln y is close to linear in 1/T along one partner (Arrhenius): extrapolate
            slope = (prev.s - before.s) / (1.0 / prev.T - 1.0 / before.T)
            s0 = prev.s + slope * (1.0 / T - 1.0 / prev.T)
        sol = self.solve_partner(partner, T, s0, prev.phase_y.get(partner))
        if sol is None:
            return self.cold(T)
        s, res = sol
        point = self.finish(T, s, {partner: res}, prev.phase_y)
        if point.converged:
            return point
        return self.cold(T)

    def _null(self, T: float, status: str, reason: str) -> BoundaryPoint:
        mu = np.full(len(self.system.elements), np.nan)
        return BoundaryPoint(T, float("nan"), (), mu, status, reason)

    # ---------------------------------------------------------------- partner changes
    def locate_change(self, a: BoundaryPoint, b: BoundaryPoint, sign: float = 1.0) -> PartnerChange:
        """Locate the temperature between valid points a and b (a.T < b.T) where the partner changes, to T_TOL.

        The boundary against a's partner is followed in temperature and the driving force of b's new partner is
        evaluated on it: negative on a's side, positive beyond the change; bisected to T_TOL. `sign` is that of
        `solve_partner`: +1 for the upper end of the host's field (the solvus), -1 for its lower end
        (`solubility.calc.lower`). Returns a change with T = nan where the new partner is not below zero at a.
        """
        beta, gamma = a.partners[0], next(p for p in b.partners if p not in a.partners)
        T_lo, T_hi = a.T, b.T
        s_ref, y_beta, y_gamma = a.s, a.phase_y.get(beta), b.phase_y.get(gamma)

        def h(T: float) -> float | None:
            sol = self.solve_partner(beta, T, s_ref, y_beta, sign=sign)
            if sol is None:
                return None
            s, _ = sol
            return self.df(gamma, self.mu(s, T), T, y_gamma).value

        f_lo = h(T_lo)
        if f_lo is None or f_lo > 0:
            return PartnerChange(float("nan"), a.partners, b.partners)
        while T_hi - T_lo > T_TOL:
            mid = 0.5 * (T_lo + T_hi)
            f_mid = h(mid)
            if f_mid is None or f_mid > 0:
                T_hi = mid
            else:
                T_lo = mid
        T_star = 0.5 * (T_lo + T_hi)
        sol = self.solve_partner(beta, T_star, s_ref, y_beta, sign=sign)
        return PartnerChange(round(T_star, 3), a.partners, b.partners, sol[0] if sol else float("nan"))


def solvus_line(req: HostRequest, temperatures: Sequence[float], *, hooks=None, lower: bool = True) -> SolvusLine:
    """Compute the solvus of a host request at each temperature (K).

    Parameters
    ----------
    req
        The host request (`solubility.calc.host.prepare_host`).
    temperatures
        K, any order; the result keeps this order.
    hooks
        Test hook: a callable ``hooks(T)`` that may raise to inject a failure at one temperature.
    lower
        Also solve the lower end of the host's field and locate where the field opens or closes
        (`solubility.calc.lower`); a fit, which needs only the solvus, leaves it out.
    """
    from solubility.calc.lower import LowerEnds

    engine = _Engine(req)
    ends_solver = LowerEnds(engine, _SCAN, Y_MIN, Y_MAX, T_TOL) if lower else None
    system, host = req.system, req.host
    T = np.asarray(temperatures, dtype=float)
    order = np.argsort(T, kind="stable")
    points: list[BoundaryPoint | None] = [None] * T.size
    lows: list[BoundaryPoint | None] = [None] * T.size
    changes: list[PartnerChange] = []
    low_changes: list[PartnerChange] = []  # changes of the lower end's partner
    field_ends: list = []
    field_y: list[Mapping] = []  # phase constitutions at each field end (for the partners' names)
    ends: list[tuple[Mapping, Mapping]] = []  # phase constitutions of the points either side of each change
    low_ends: list[tuple[Mapping, Mapping]] = []  # the same for the lower end's changes
    prev: BoundaryPoint | None = None
    before: BoundaryPoint | None = None
    last: tuple[BoundaryPoint, BoundaryPoint] | None = None  # (upper, lower) at the previous temperature
    prev_low: BoundaryPoint | None = None  # the last valid lower end of an unbroken run
    for k in order:
        Tk = float(T[k])
        point = low = None
        try:
            if hooks is not None:
                hooks(Tk)
            point = engine.warm(Tk, prev, before) if prev is not None and prev.valid else engine.cold(Tk)
            if ends_solver is not None:
                low = ends_solver.point(Tk, point, last[1] if last is not None else None)
        except (ArithmeticError, ValueError, np.linalg.LinAlgError, RuntimeError) as exc:
            failed = BoundaryPoint(Tk, float("nan"), (), np.full(len(system.elements), np.nan), "failed",
                                   f"solver failed: {exc}")
            point, low = point or failed, None if ends_solver is None else failed
        if point.valid and prev is not None and prev.valid and set(point.partners) != set(prev.partners) \
                and Tk > prev.T:
            extra = [p for p in point.partners if p not in prev.partners]
            if extra:
                changes.append(engine.locate_change(prev, point))
                ends.append((prev.phase_y, point.phase_y))
        if low is not None and low.valid and prev_low is not None and Tk > prev_low.T \
                and any(p not in prev_low.partners for p in low.partners):
            low_changes.append(engine.locate_change(prev_low, low, sign=-1.0))
            low_ends.append((prev_low.phase_y, low.phase_y))
        if ends_solver is not None and last is not None and Tk > last[0].T:
            inside = [pt.status in ("ok", "no_partner") for pt in (last[0], point)]
            unstable = [pt.status == "host_unstable" for pt in (last[0], point)]
            side = last if inside[0] and unstable[1] else (point, low) if unstable[0] and inside[1] else None
            if side is not None:
                field_ends.append(ends_solver.field_end(*side, Tk if side is last else last[0].T))
                field_y.append({**side[0].phase_y, **side[1].phase_y})
        points[k], lows[k] = point, low
        last = (point, low)
        if point.valid:
            prev, before = point, prev
        elif point.status != "failed":
            prev = before = None  # the line is broken: start the next point from nothing
        if low is not None and low.valid:
            prev_low = low
        elif low is None or low.status != "failed":
            prev_low = None  # no lower end here: a change of its partner is not sought across the gap
    view = engine.system
    if hasattr(view, "label"):
        def named(cs: list[PartnerChange], sides: list[tuple[Mapping, Mapping]]) -> list[PartnerChange]:
            return [replace(c, below=partner_names(view, c.below, lo), above=partner_names(view, c.above, hi))
                    for c, (lo, hi) in zip(cs, sides, strict=True)]

        points = [relabel(view, p) for p in points]
        lows = [None if p is None else relabel(view, p) for p in lows]
        changes, low_changes = named(changes, ends), named(low_changes, low_ends)
        field_ends = [replace(f, partners=partner_names(view, f.partners, y))
                      for f, y in zip(field_ends, field_y, strict=True)]
    return SolvusLine(tuple(points), tuple(changes), host, tuple(system.elements),
                      np.asarray(system.molar_masses), tuple(req.candidates), system.phases[host.phase].moles,
                      tuple(lows) if lower else (), tuple(field_ends), tuple(low_changes))
