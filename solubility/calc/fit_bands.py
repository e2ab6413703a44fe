"""Uncertainty bands: a fit's parameter uncertainty propagated to the solvus or uptake line it describes.

Two ways, both with the exact engines (so the band carries no grid noise):

* linearised (the default): ``var(ln x(T)) = g(T)^T C g(T)`` with C the fitted covariance and
  ``g = d ln x / d theta`` by forward differences of the engine (k + 1 lines); the bounds are
  ``ln x +- z sd`` with z the two-sided normal quantile of the confidence (1.96 at 0.95);
* sampled: the line at each of a set of parameter vectors (e.g. an MCMC trace from a CSV file, one column per free
  symbol); the bounds are the empirical quantiles (1 - confidence) / 2 and (1 + confidence) / 2 of ln x at each T.

The line is the solvus (against whichever phase the engine finds), the uptake at a partial pressure of X2 (Pa), or
the uptake at an activity.
"""

from __future__ import annotations

import csv
import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from solubility.errors import InputError

__all__ = ["MAX_SAMPLES", "Band", "band_condition", "compute_band", "read_samples"]

#: most parameter samples evaluated; a longer trace is thinned evenly to this many
MAX_SAMPLES = 400
_KINDS = {"solvus": "solvus", "p_pa": "p_Pa", "activity": "activity"}


@dataclass(frozen=True)
class Band:
    """A line with its band.

    Attributes
    ----------
    T
        K.
    lnx, lower, upper
        ln of the mole fraction on the fitted line and the bounds (nan where the model has no number).
    sd
        Standard deviation of ln x (linearised, or over the samples).
    kind, value
        The line: "solvus" (value nan), "p_Pa" (Pa) or "activity".
    confidence
        Two-sided confidence of the bounds (0 < confidence < 1).
    method
        "linearised covariance" or "parameter samples".
    n_samples
        Samples used (0 when linearised).
    """

    T: np.ndarray
    lnx: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    sd: np.ndarray
    kind: str
    value: float
    confidence: float
    method: str
    n_samples: int = 0

    @property
    def description(self) -> str:
        if self.kind == "solvus":
            return "solvus"
        return f"p(X2) = {self.value:g} Pa" if self.kind == "p_Pa" else f"activity {self.value:g}"


def band_condition(text: str | None, data: Any) -> tuple[str, float]:
    """The band's line from ``solvus``, ``p_Pa=VALUE`` or ``activity=VALUE``; default: the data's one condition.

    Raises
    ------
    InputError
        A bad spec, or none given while the data hold points under several conditions.
    """
    if text is None:
        conds = {("solvus", math.nan) if k == "solvus" else (k, float(v)) for k, v in zip(data.kind, data.value,
                                                                                         strict=True)}
        if len(conds) != 1:
            raise InputError("the data hold points under several conditions; say which line the band is on (solvus, "
                             "p_Pa=VALUE or activity=VALUE)")
        return next(iter(conds))
    name, sep, val = str(text).partition("=")
    kind = _KINDS.get(name.strip().lower())
    if kind is None or (kind == "solvus") == bool(sep):
        raise InputError(f"band condition {text!r} is not solvus, p_Pa=VALUE or activity=VALUE")
    if kind == "solvus":
        return kind, math.nan
    try:
        value = float(val)
    except ValueError:
        raise InputError(f"band condition {text!r}: {val!r} is not a number") from None
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"band condition {text!r}: the value must be a finite number above zero")
    return kind, value


def read_samples(path: str | Path, names: Sequence[str]) -> np.ndarray:
    """Parameter samples from a CSV file: one column per free symbol (any case), other columns ignored.

    Returns an array (m, k) in the order of `names`. Raises InputError for a missing column, a value that is not a
    finite number, or fewer than 10 rows (too few for the quantiles of a band).
    """
    p = Path(path)
    try:
        with open(p, newline="", encoding="utf-8") as fh:
            reader = csv.DictReader(fh)
            rows = list(reader)
            header = {(h or "").strip().upper(): h for h in (reader.fieldnames or [])}
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"samples file {str(p)!r} cannot be read: {getattr(exc, 'strerror', None) or exc}") from None
    missing = [n for n in names if n.upper() not in header]
    if missing:
        raise InputError(f"samples file {p.name}: no column {missing[0]!r} (one column per free symbol: "
                         f"{', '.join(names)})")
    out = np.empty((len(rows), len(names)))
    for i, r in enumerate(rows):
        for j, n in enumerate(names):
            text = (r.get(header[n.upper()]) or "").strip()
            try:
                out[i, j] = float(text)
            except ValueError:
                out[i, j] = math.nan
            if not math.isfinite(out[i, j]):
                raise InputError(f"samples file {p.name}, line {i + 2}: {n} = {text!r} is not a finite number")
    if len(rows) < 10:
        raise InputError(f"samples file {p.name} has {len(rows)} rows; give at least 10 samples")
    return out


def compute_band(result: Any, temperatures: Sequence[float], condition: tuple[str, float], *,
                 confidence: float = 0.95, samples: np.ndarray | None = None) -> Band:
    """The fitted line over `temperatures` (K) with its band at `confidence` (module docstring).

    Parameters
    ----------
    result
        A `solubility.calc.fitting.FitResult` (from `solubility.api.fit`).
    condition
        (kind, value) from `band_condition`.
    samples
        (m, k) parameter vectors in the order of ``result.names`` (`read_samples`), or None: linearised.
    """
    from scipy.stats import norm

    from solubility.calc.fitting import Forward

    if not (0.0 < confidence < 1.0):
        raise InputError(f"confidence {confidence!r} is outside 0 < confidence < 1")
    if result.forward is None:
        raise InputError("this fit holds no forward model (fit through solubility.api.fit)")
    T = np.asarray(temperatures, dtype=float)
    kind, value = condition
    fwd = Forward(result.forward.req, result.names, T, [kind] * T.size, [value] * T.size)
    theta = np.asarray(result.values, dtype=float)
    lnx = fwd.lnx(theta)
    if samples is None:
        cov = np.asarray(result.covariance, dtype=float)
        if not np.all(np.isfinite(cov)):
            raise InputError("the fit's covariance is not finite (the data do not fix every parameter); no band")
        J = fwd.jacobian(theta, lnx)
        sd = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", J, cov, J), 0.0))
        z = float(norm.ppf(0.5 + confidence / 2.0))
        return Band(T, lnx, lnx - z * sd, lnx + z * sd, sd, kind, value, confidence, "linearised covariance")
    samples = np.asarray(samples, dtype=float)
    if samples.ndim != 2 or samples.shape[1] != theta.size:
        raise InputError(f"samples must have one column per free symbol ({', '.join(result.names)})")
    if samples.shape[0] > MAX_SAMPLES:
        samples = samples[np.linspace(0, samples.shape[0] - 1, MAX_SAMPLES).round().astype(int)]
    lines = np.array([fwd.lnx(s) for s in samples])
    with warnings.catch_warnings():  # a temperature where no sample has a number gives nan bounds, said by nan
        warnings.simplefilter("ignore", RuntimeWarning)
        q = np.nanquantile(lines, [(1.0 - confidence) / 2.0, (1.0 + confidence) / 2.0], axis=0)
        sd = np.nanstd(lines, axis=0)
    return Band(T, lnx, q[0], q[1], sd, kind, value, confidence, "parameter samples",
                int(samples.shape[0]))
