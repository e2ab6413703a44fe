"""Least-squares fits of free model parameters to measured solubility, with the exact engines as forward model.

The free parameters are symbols of a PARAMETER expression left undefined in the database (``A + B*T``); the
compiled system keeps them free and takes their values per call (`solubility.calc.host.prepare_host`), so an
iteration binds new values and nothing is recompiled. The forward model of a solvus point is the exact solvus
(`solubility.calc.boundary.solvus_line`); of a gas point (``p_Pa``) or a point at an activity, the uptake
engine's exact solve of the host's content at that potential (`solubility.calc.surroundings.host_contents`).
Residuals are in ln x (relative errors):
``r_i = (ln x_model(T_i) - ln x_i) / sigma_i`` with ``sigma_i`` the relative standard uncertainty of point i
(1 when the data give none: then the covariance is scaled by chi2 / (n - k), the usual estimate of the scatter).
Covariance ``(J^T J)^-1`` from the Jacobian at the optimum; ``chi2 = sum r_i^2``; for Gaussian errors
``AIC = n ln(chi2 / n) + 2 k`` and ``BIC = n ln(chi2 / n) + k ln n`` (up to a constant common to all models fitted
to the same data, so only differences between models mean anything).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from solubility.calc.fit_data import SYMBOL_RE, FitData, free_symbols, read_fit_data
from solubility.errors import InputError

__all__ = ["FitData", "FitResult", "Forward", "fit_solvus", "fitted_database_text", "free_database", "free_symbols",
           "read_fit_data", "substitute"]

#: relative forward-difference step of the Jacobian, times max(|value|, 1); the engines' ln x is exact to about
#: 1e-10 (their tolerance), so a step moving ln x by about 1e-6 keeps the Jacobian's error near 1e-4 relative
_FD_STEP = 1e-6
#: residual given to a point the model has no number for (never chosen at the optimum)
_MISSING = 1e3


@dataclass
class FitResult:
    """A fit: values, standard errors, covariance, residuals (ln x, weighted), chi2, AIC, BIC."""

    names: tuple[str, ...]
    values: np.ndarray
    stderr: np.ndarray
    covariance: np.ndarray
    residuals: np.ndarray
    x_model: np.ndarray
    chi2: float
    n_points: int
    aic: float
    bic: float
    data: FitData
    partners: tuple[str, ...]
    n_solvus_lines: int
    converged: bool
    message: str
    extra: dict[str, Any] = field(default_factory=dict)
    #: the fitted PARAMETER, its expression with the free symbols, the database text it was set in
    free_key: str = ""
    free_expression: str = ""
    base_text: str = field(default="", repr=False)
    forward: Any = field(default=None, repr=False)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe: parameters {name: {value, stderr}}, covariance, residuals, chi2, n_points, aic, bic, ..."""
        return {
            "parameters": {n: {"value": float(v), "stderr": float(s)}
                           for n, v, s in zip(self.names, self.values, self.stderr, strict=True)},
            "covariance": self.covariance.tolist(),
            "residuals": [float(r) for r in self.residuals],
            "chi2": self.chi2, "n_points": self.n_points, "aic": self.aic, "bic": self.bic,
            "converged": self.converged, "message": self.message,
            "partners": list(self.partners), "n_solvus_lines": self.n_solvus_lines, **self.extra,
        }

    @property
    def dof(self) -> int:
        """Degrees of freedom n - k."""
        return self.n_points - len(self.names)


def _x_of_s(req: Any, s: np.ndarray) -> np.ndarray:
    """Mole fraction of the solute in the host at ln y = s (nan stays nan)."""
    elements = list(req.system.elements)
    k = elements.index(req.solute)
    real = [i for i, e in enumerate(elements) if e != "VA"]
    moles = req.system.phases[req.phase].moles
    out = np.full(len(s), np.nan)
    for i, si in enumerate(s):
        if math.isfinite(si):
            m = moles @ req.host.y(float(si))
            out[i] = m[k] / m[real].sum()
    return out


class Forward:
    """ln x of the model at given points as a function of the free parameters (values bound, never compiled).

    Parameters
    ----------
    req
        The host request (`prepare_host(..., parameters=start)`).
    names
        Free symbols, in the order of the parameter vectors.
    T, kind, value
        The points: K; "solvus", "p_Pa" or "activity"; the partial pressure (Pa) or the activity (nan for solvus).
    """

    def __init__(self, req: Any, names: Sequence[str], T: Sequence[float], kind: Sequence[str],
                 value: Sequence[float]) -> None:
        from solubility.calc.surroundings import Surroundings, solute_potential

        self.req, self.names = req, tuple(names)
        self.T = np.asarray(T, dtype=float)
        self.kind, self.value = tuple(kind), np.asarray(value, dtype=float)
        self.evaluations = 0
        self._solvus = np.flatnonzero([k == "solvus" for k in self.kind])
        self._groups: dict[tuple[str, float], tuple[list[int], Any]] = {}
        for i, (k, v) in enumerate(zip(self.kind, self.value, strict=True)):
            if k == "solvus":
                continue
            if (k, float(v)) not in self._groups:
                sur = Surroundings.check(activity=v) if k == "activity" else Surroundings.check(partial_pressure=v)
                self._groups[(k, float(v))] = ([], solute_potential(req.database, req.solute, sur, req.pressure))
            self._groups[(k, float(v))][0].append(i)
        self._s = np.full(self.T.size, np.nan)  # last solutions: warm starts of the uptake solves
        self.partners: tuple[str, ...] = ("",) * self.T.size

    def bind(self, theta: Sequence[float]) -> Any:
        """The host request with the parameter values `theta` bound (compiles nothing)."""
        params = dict(zip(self.names, (float(t) for t in theta), strict=True))
        return self.req.rebound(parameters=params)

    def lnx(self, theta: Sequence[float]) -> np.ndarray:
        """ln x at every point (nan where the model has no number: no solvus, no solution)."""
        from solubility.calc.boundary import solvus_line
        from solubility.calc.surroundings import host_contents

        req = self.bind(theta)
        out = np.full(self.T.size, np.nan)
        partners = list(self.partners)
        self.evaluations += 1
        if self._solvus.size:
            line = solvus_line(req, self.T[self._solvus])
            s = np.array([p.s if p.status == "ok" and math.isfinite(p.s) else np.nan for p in line.points])
            out[self._solvus] = np.log(_x_of_s(req, s))
            for i, p in zip(self._solvus, line.points, strict=True):
                partners[i] = "+".join(p.partners)
        for (k, v), (idx, pot) in self._groups.items():
            s = host_contents(req, pot, self.T[idx], self._s[idx])
            self._s[idx] = np.where(np.isfinite(s), s, self._s[idx])
            out[idx] = np.log(_x_of_s(req, s))
            for i in idx:
                partners[i] = f"{'gas' if k == 'p_Pa' else 'activity'} {v:g}"
        self.partners = tuple(partners)
        return out

    def jacobian(self, theta: np.ndarray, f0: np.ndarray | None = None) -> np.ndarray:
        """d ln x / d theta by forward differences (step `_FD_STEP` relative)."""
        f0 = self.lnx(theta) if f0 is None else f0
        J = np.empty((f0.size, len(theta)))
        for j in range(len(theta)):
            h = _FD_STEP * max(abs(theta[j]), 1.0)
            t = np.array(theta, dtype=float)
            t[j] += h
            J[:, j] = (self.lnx(t) - f0) / h
        return J


def fit_solvus(req: Any, data: FitData, start: Mapping[str, float],
               bounds: Mapping[str, tuple[float, float]] | None = None) -> FitResult:
    """Fit the free parameters of a host request (`prepare_host(..., parameters=start)`) to the data.

    Solvus points use the exact solvus, gas and activity points the uptake solve (module docstring).

    Parameters
    ----------
    req
        The host request, prepared with every free symbol given a starting value.
    data
        The measured points (`read_fit_data`).
    start, bounds
        Starting values; optional (low, high) bounds per name.

    Raises
    ------
    InputError
        A data point names a partner that is not a candidate phase; the model has no number at a point of the
        data at the starting values.
    """
    from scipy.optimize import least_squares

    names = tuple(sorted(start))
    for ptn in set(data.partner) - {""}:
        if ptn not in req.candidates:
            raise InputError(f"partner {ptn!r} of the data is not a phase that may appear here "
                             f"({', '.join(req.others) or 'none'})")
    fwd = Forward(req, names, data.T, data.kind, data.value)
    if data.T.size < len(names):
        raise InputError(f"the data hold {data.T.size} point(s) for {len(names)} free symbols ({', '.join(names)}); "
                         "give at least as many points as free symbols")
    lnx_data = np.log(data.x)

    def resid(theta: np.ndarray) -> np.ndarray:
        r = (fwd.lnx(theta) - lnx_data) / data.sigma_rel
        return np.where(np.isfinite(r), r, _MISSING)

    def jac(theta: np.ndarray) -> np.ndarray:
        return fwd.jacobian(theta) / data.sigma_rel[:, None]

    x0 = np.array([start[n] for n in names], dtype=float)
    ok0 = np.isfinite(fwd.lnx(x0))
    if not ok0.all():
        bad = data.T[~ok0]
        what = "solvus" if data.kind[int(np.flatnonzero(~ok0)[0])] == "solvus" else "solution"
        raise InputError(f"the model has no {what} at {bad[0]:g} K with the starting values; give other starting "
                         "values (--start NAME=VALUE)")
    lo = np.array([(bounds or {}).get(n, (-np.inf, np.inf))[0] for n in names])
    hi = np.array([(bounds or {}).get(n, (-np.inf, np.inf))[1] for n in names])
    scale = np.maximum(np.abs(x0), 1.0)
    sol = least_squares(resid, x0, jac=jac, bounds=(lo, hi), x_scale=scale, method="trf", xtol=1e-12,
                        ftol=1e-12, gtol=1e-12, max_nfev=100)
    lnx_fit = fwd.lnx(sol.x)
    ok = np.isfinite(lnx_fit)
    r = (lnx_fit - lnx_data) / data.sigma_rel
    J = sol.jac
    n, k = r.size, len(names)
    chi2 = float(np.sum(np.where(ok, r, _MISSING) ** 2))
    try:
        cov = np.linalg.inv(J.T @ J)
    except np.linalg.LinAlgError:
        cov = np.full((k, k), np.nan)
    if not data.weighted and n > k:
        cov = cov * chi2 / (n - k)
    rss = max(chi2 / n, 1e-300)
    with np.errstate(invalid="ignore"):  # a parameter the data do not fix: nan, never a number
        stderr = np.where(np.diag(cov) >= 0, np.sqrt(np.abs(np.diag(cov))), np.nan)
    return FitResult(names, sol.x, stderr, cov, r, np.exp(lnx_fit), chi2, n,
                     float(n * math.log(rss) + 2 * k), float(n * math.log(rss) + k * math.log(n)), data,
                     fwd.partners, fwd.evaluations, bool(sol.success and ok.all()), str(sol.message),
                     forward=fwd)


def substitute(expression: str, values: Mapping[str, float]) -> str:
    """A TDB expression with each free symbol replaced by its value (in parentheses, full precision)."""
    vals = {str(k).upper(): float(v) for k, v in values.items()}
    return SYMBOL_RE.sub(lambda m: f"({vals[m.group(1)]:.15E})" if m.group(1) in vals else m.group(0),
                         expression.upper())


def fitted_database_text(result: FitResult) -> str:
    """The database the fit started from with the fitted values written into its PARAMETER."""
    from solubility.models.tdb_writer import with_parameter

    if not result.base_text or not result.free_key:
        raise InputError("this fit holds no database text to write (fit through solubility.api.fit)")
    values = dict(zip(result.names, result.values, strict=True))
    return with_parameter(result.base_text, result.free_key, substitute(result.free_expression, values))


def free_database(database: Any, key: str, expression: str, *, text: str | None = None) -> tuple[Any, list[str]]:
    """The database with PARAMETER `key` set to `expression` whose undefined symbols are left free.

    Parameters
    ----------
    database
        Path, bundled name or loaded database; `text`, when given, is used instead of its file's text.

    Returns
    -------
    (LoadedDatabase, names)
        The database (parsed through the guards) and the free symbol names, sorted.

    Raises
    ------
    InputError
        The expression names no free symbol, or the database has no file to start from.
    """
    import os
    import tempfile

    from solubility.databases.reader import load_database
    from solubility.models.tdb_commands import functions_of
    from solubility.models.tdb_writer import with_parameter

    if text is None:
        text = database_text(database)
    names = free_symbols(expression, list(functions_of(text)))
    if not names:
        raise InputError(f"expression {expression!r} names no free symbol; write the unknowns as names, e.g. A+B*T")
    # pycalphad leaves free only symbols the database defines: each free name gets a FUNCTION placeholder
    new = with_parameter(text, key, expression) + "".join(f" FUNCTION {n} 298.15 0; 6000 N !\n" for n in names)
    fd, tmp = tempfile.mkstemp(suffix=".tdb", prefix="solubility-fit-")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(new)
        loaded = load_database(tmp)
    finally:
        os.unlink(tmp)
    return loaded, names


def database_text(database: Any) -> str:
    """The TDB text of a database (path or bundled name); InputError when it has no file."""
    from solubility.databases.reader import load_database

    ldb = load_database(database)
    if ldb.path is None:
        raise InputError(f"database {ldb.name!r} has no file; give a TDB file or a bundled name")
    return ldb.path.read_text(encoding="utf-8", errors="replace")
