"""Least-squares fits of free model parameters to measured solubility, with the exact solvus engine as forward model.

The free parameters are symbols of a PARAMETER expression left undefined in the database (``A + B*T``); the
compiled system keeps them free and takes their values per call (`solubility.calc.host.prepare_host`), so an
iteration binds new values and nothing is recompiled. Residuals are in ln x (relative errors):
``r_i = (ln x_model(T_i) - ln x_i) / sigma_i`` with ``sigma_i`` the relative standard uncertainty of point i
(1 when the data give none: then the covariance is scaled by chi2 / (n - k), the usual estimate of the scatter).
Covariance ``(J^T J)^-1`` from the Jacobian at the optimum; ``chi2 = sum r_i^2``; for Gaussian errors
``AIC = n ln(chi2 / n) + 2 k`` and ``BIC = n ln(chi2 / n) + k ln n`` (up to a constant common to all models fitted
to the same data, so only differences between models mean anything).
"""

from __future__ import annotations

import csv
import dataclasses
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from solubility.errors import InputError

__all__ = ["FitData", "FitResult", "fit_solvus", "free_database", "free_symbols", "read_fit_data"]

_COMPOSITION_COLUMNS = ("x", "wt_percent", "ppm")
_KNOWN = {"T_K", *_COMPOSITION_COLUMNS, "partner", "p_Pa", "activity", "sigma_rel", "source"}
#: relative forward-difference step of the Jacobian, times max(|value|, 1); the engine's ln x is exact to about
#: 1e-10 (its tolerance), so a step moving ln x by about 1e-6 keeps the Jacobian's error near 1e-4 relative
_FD_STEP = 1e-6


@dataclass(frozen=True)
class FitData:
    """Measured solvus points: temperatures (K), mole fractions, relative uncertainties, partners, sources."""

    T: np.ndarray
    x: np.ndarray
    sigma_rel: np.ndarray
    partner: tuple[str, ...]
    source: tuple[str, ...]
    weighted: bool


def read_fit_data(path: str | Path, *, molar_masses: Mapping[str, float] | None = None, solute: str = "",
                  host: str = "") -> FitData:
    """Read a data CSV: ``T_K``; one of ``x``, ``wt_percent``, ``ppm``; optional ``partner``, ``p_Pa``,
    ``activity``, ``sigma_rel``, ``source``.

    wt_percent and ppm (by mass) are converted to mole fractions of a binary host-solute alloy with
    `molar_masses` (g/mol). Points in equilibrium with a gas (``p_Pa``) or at an activity need the uptake
    calculation and are refused for now.

    Raises
    ------
    InputError
        A missing or unknown column, a value that is not a positive finite number, a fraction outside (0, 1).
    """
    p = Path(path)
    try:
        with open(p, newline="", encoding="utf-8") as fh:
            reader = csv.DictReader(fh)
            rows = [{(k or "").strip(): v for k, v in r.items()} for r in reader]
            header = [h.strip() for h in (reader.fieldnames or [])]
    except OSError as exc:
        raise InputError(f"data file {str(p)!r} cannot be read: {exc.strerror or exc}") from None
    unknown = [h for h in header if h not in _KNOWN]
    if unknown:
        raise InputError(f"data file {p.name}: unknown column {unknown[0]!r}; columns: T_K; one of x, wt_percent, "
                         "ppm; optional partner, p_Pa, activity, sigma_rel, source")
    if "T_K" not in header:
        raise InputError(f"data file {p.name}: column T_K is missing (temperature, K)")
    comp = [c for c in _COMPOSITION_COLUMNS if c in header]
    if len(comp) != 1:
        raise InputError(f"data file {p.name}: give exactly one of the columns x, wt_percent, ppm (found "
                         f"{', '.join(comp) or 'none'})")
    for col in ("p_Pa", "activity"):
        if col in header and any((r.get(col) or "").strip() for r in rows):
            raise InputError(f"data file {p.name}: column {col} needs the uptake calculation, which is not "
                             "available yet; fit solvus points (with a partner phase) for now")
    if not rows:
        raise InputError(f"data file {p.name} has no data rows")
    col = comp[0]
    def column(name: str) -> np.ndarray:
        return np.array([_number(r, name, p.name, i) for i, r in enumerate(rows, start=2)])

    T, v = column("T_K"), column(col)
    weighted = "sigma_rel" in header
    sig = column("sigma_rel") if weighted else np.ones_like(T)
    if col == "x":
        x = v
    else:
        w = v / (100.0 if col == "wt_percent" else 1e6)
        if molar_masses is None:
            raise InputError("mass fractions need the molar masses of the host and the solute")
        ms, mh = molar_masses[solute], molar_masses[host]
        x = (w / ms) / (w / ms + (1.0 - w) / mh)
    if np.any(x >= 1.0):
        raise InputError(f"data file {p.name}: a composition is 1 or more (column {col}); give fractions below 1")
    partner = tuple((r.get("partner") or "").strip().upper() for r in rows)
    source = tuple((r.get("source") or "").strip() for r in rows)
    return FitData(T, x, sig, partner, source, weighted)


def _number(row: Mapping[str, str], name: str, file: str, line: int) -> float:
    text = (row.get(name) or "").strip()
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"data file {file}, line {line}: {name} = {text!r} is not a number") from None
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"data file {file}, line {line}: {name} = {text!r} must be a finite number above zero")
    return value


_SYMBOL_RE = re.compile(r"(?<![A-Z0-9_.#])([A-Z_][A-Z0-9_]*)(?![A-Z0-9_#(])")


def free_symbols(expression: str, defined: Sequence[str]) -> list[str]:
    """Names in a TDB expression that are neither FUNCTIONs of the database (`defined`) nor T, P, R, LN, EXP, LOG."""
    names = {m.group(1) for m in _SYMBOL_RE.finditer(expression.upper())}
    names -= {"T", "P", "R", "LN", "EXP", "LOG", *(d.upper() for d in defined)}
    return sorted(n for n in names if not re.fullmatch(r"[ED]\d*", n))


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


def _mole_fraction(line: Any, solute: str) -> tuple[np.ndarray, tuple[str, ...], list[bool]]:
    k = list(line.elements).index(solute)
    xs, partners, ok = [], [], []
    for pt in line.points:
        good = pt.status == "ok" and math.isfinite(pt.s)
        if good:
            moles = line.host_moles @ line.host.y(pt.s)
            real = [i for i, e in enumerate(line.elements) if e != "VA"]
            xs.append(float(moles[k] / moles[real].sum()))
        else:
            xs.append(float("nan"))
        partners.append("+".join(pt.partners))
        ok.append(good)
    return np.array(xs), tuple(partners), ok


def fit_solvus(req: Any, data: FitData, start: Mapping[str, float],
               bounds: Mapping[str, tuple[float, float]] | None = None) -> FitResult:
    """Fit the free parameters of a host request (`prepare_host(..., parameters=start)`) to solvus data.

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
        A data point names a partner that is not a candidate phase; the model has no solvus at a temperature
        of the data at the starting values.
    """
    from scipy.optimize import least_squares

    from solubility.calc.boundary import solvus_line

    names = tuple(sorted(start))
    for ptn in set(data.partner) - {""}:
        if ptn not in req.candidates:
            raise InputError(f"partner {ptn!r} of the data is not a phase that may appear here "
                             f"({', '.join(req.others)})")
    compiled = req.system.compiled
    count = {"lines": 0}

    def line_at(theta: np.ndarray) -> tuple[np.ndarray, tuple[str, ...], list[bool]]:
        params = dict(zip(names, (float(t) for t in theta), strict=True))
        system = compiled.bind(req.pressure, params)  # binds values; compiles nothing
        r2 = dataclasses.replace(req, system=system, parameters=params)
        count["lines"] += 1
        return _mole_fraction(solvus_line(r2, data.T), req.solute)

    def resid(theta: np.ndarray) -> np.ndarray:
        x, _, ok = line_at(theta)
        r = (np.log(np.where(ok, x, np.nan)) - np.log(data.x)) / data.sigma_rel
        return np.where(np.isfinite(r), r, 1e3)  # a point without a solvus costs much (never chosen at the optimum)

    def jac(theta: np.ndarray) -> np.ndarray:
        r0 = resid(theta)
        J = np.empty((r0.size, theta.size))
        for j in range(theta.size):
            h = _FD_STEP * max(abs(theta[j]), 1.0)
            t = theta.copy()
            t[j] += h
            J[:, j] = (resid(t) - r0) / h
        return J

    x0 = np.array([start[n] for n in names], dtype=float)
    _, _, ok0 = line_at(x0)
    if not all(ok0):
        bad = data.T[~np.asarray(ok0)]
        raise InputError(f"the model has no solvus at {bad[0]:g} K with the starting values; give other starting "
                         "values (--start NAME=VALUE)")
    lo = np.array([(bounds or {}).get(n, (-np.inf, np.inf))[0] for n in names])
    hi = np.array([(bounds or {}).get(n, (-np.inf, np.inf))[1] for n in names])
    scale = np.maximum(np.abs(x0), 1.0)
    sol = least_squares(resid, x0, jac=jac, bounds=(lo, hi), x_scale=scale, method="trf", xtol=1e-12,
                        ftol=1e-12, gtol=1e-12, max_nfev=100)
    x_fit, partners, ok = line_at(sol.x)
    r = (np.log(x_fit) - np.log(data.x)) / data.sigma_rel
    J = sol.jac
    n, k = r.size, len(names)
    chi2 = float(np.sum(r * r))
    try:
        cov = np.linalg.inv(J.T @ J)
    except np.linalg.LinAlgError:
        cov = np.full((k, k), np.nan)
    if not data.weighted and n > k:
        cov = cov * chi2 / (n - k)
    rss = max(chi2 / n, 1e-300)
    return FitResult(names, sol.x, np.sqrt(np.diag(cov)), cov, r, x_fit, chi2, n,
                     float(n * math.log(rss) + 2 * k), float(n * math.log(rss) + k * math.log(n)), data, partners,
                     count["lines"], bool(sol.success and all(ok)), str(sol.message))



def free_database(database: Any, key: str, expression: str) -> tuple[Any, list[str]]:
    """The database with PARAMETER `key` set to `expression` whose undefined symbols are left free.

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

    ldb = load_database(database)
    if ldb.path is None:
        raise InputError(f"database {ldb.name!r} has no file; give a TDB file or a bundled name")
    text = ldb.path.read_text(encoding="utf-8", errors="replace")
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
