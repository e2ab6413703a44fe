"""The public calculations: validate the input, compute, and return a labelled xarray Dataset.

Each function here is thin: the work is done in `solubility.calc` and the Dataset is built in
`solubility.results`.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence

from solubility.calc.inputs import MAX_TEMPERATURES
from solubility.errors import InputError

__all__ = ["fit", "solvus"]


def solvus(database, phase: str, solute: str, temperatures, *, exclude: Sequence[str] = (),
           fix: Mapping[str, float] | None = None, pressure: float = 101325.0, balance: str | None = None,
           celsius: bool = False, parameters: Mapping[str, float] | None = None,
           max_temperatures: int | None = MAX_TEMPERATURES):
    """Terminal solubility of `solute` in the host `phase` against temperature.

    Parameters
    ----------
    database
        Path to a TDB file, the name of a bundled database, or a pycalphad Database.
    phase
        Host phase, a two-sublattice (hosts)a(X,VA)c solution such as BCC_A2.
    solute
        Interstitial element, such as "C".
    temperatures
        Kelvin (Celsius with ``celsius=True``): a sequence, or "START:STOP:STEP" with STOP included.
    exclude
        Phases not allowed to appear (for example GRAPHITE for the metastable Fe-Fe3C diagram).
    fix
        u-fractions (mole fraction on an interstitial-free basis) of other elements of the host, e.g.
        ``{"CR": 0.02}``; the balance element takes the rest.
    pressure
        Pa.
    balance
        The host's balance element; needed only when the host's substitutional sublattice holds several
        elements not given in `fix`.
    celsius
        Temperatures are given in degrees Celsius (results stay in K, with a Celsius coordinate).
    parameters
        Values of database symbols left free at compile time (name -> value); a new value does not recompile.
    max_temperatures
        Most temperatures accepted (20,000 by default); None lifts the limit.

    Returns
    -------
    xarray.Dataset
        Dims ``T``; variables X (mole fraction), W (mass fraction), PPM (ppm by mass), Y (site fraction of the
        solute on its sublattice), partner, converged, reason, MU (J/mol); partner changes in
        ``partner_change_T`` along ``change``. A temperature where the host is not stable holds NaN and a
        reason, never a number. With `parameters`, their values are in the attr ``parameters`` (JSON).
    """
    from solubility.calc import boundary
    from solubility.calc.host import prepare_host
    from solubility.calc.inputs import parse_temperatures
    from solubility.results.dataset import build_dataset

    T = parse_temperatures(temperatures, celsius=celsius, max_count=max_temperatures)
    req = prepare_host(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance,
                       parameters=parameters)
    line = boundary.solvus_line(req, T)
    ds = build_dataset(line, req)
    if req.parameters:  # provenance: the values the free parameters had (JSON, flat attrs)
        ds.attrs["parameters"] = json.dumps(dict(req.parameters))
    return ds


def fit(data, database, phase: str, solute: str, free: str, *, start: Mapping[str, float] | None = None,
        bounds: Mapping[str, tuple[float, float]] | None = None, exclude: Sequence[str] = (),
        pressure: float = 101325.0):
    """Fit free symbols of one parameter expression to measured solvus data (least squares in ln x).

    Parameters
    ----------
    data
        CSV file: ``T_K``; one of ``x``, ``wt_percent``, ``ppm``; optional ``partner``, ``sigma_rel`` (relative
        standard uncertainty), ``source`` (`solubility.calc.fitting.read_fit_data`).
    database, phase, solute, exclude, pressure
        As in `solvus`.
    free
        ``'G(PHASE,M:X;0)=EXPR'``; EXPR may use the database's FUNCTIONs and names the free symbols
        (``GHSERFE#+3*GHSERCC#+A+B*T``): every name that is no FUNCTION of the database is fitted.
    start, bounds
        Starting values (default 0) and (low, high) bounds by symbol name.

    Returns
    -------
    solubility.calc.fitting.FitResult
        ``to_dict()`` gives parameters {name: {value, stderr}}, covariance, residuals, chi2, n_points, aic, bic.
    """
    from solubility.calc.fitting import fit_solvus, free_database, read_fit_data
    from solubility.calc.host import prepare_host

    key, sep, expr = str(free).partition("=")
    if not sep or not key.strip() or not expr.strip():
        raise InputError(f"free parameter {free!r} is not 'G(PHASE,M:X;0)=EXPRESSION'")
    ldb, names = free_database(database, key.strip(), expr.strip())
    given = {str(k).upper(): float(v) for k, v in (start or {}).items()}
    unknown = sorted(set(given) - set(names))
    if unknown:
        raise InputError(f"starting value for {unknown[0]}, which is not a free symbol of the expression "
                         f"({', '.join(names)})")
    values = {n: given.get(n, 0.0) for n in names}
    req = prepare_host(ldb, phase, solute, exclude=exclude, pressure=pressure, parameters=values)
    masses = dict(zip(req.system.elements, (float(m) for m in req.system.molar_masses), strict=True))
    dat = read_fit_data(data, molar_masses=masses, solute=req.solute, host=req.balance)
    result = fit_solvus(req, dat, values, {str(k).upper(): v for k, v in (bounds or {}).items()})
    result.extra.update({"database": ldb.name, "phase": req.phase, "solute": req.solute, "free": str(free)})
    return result
