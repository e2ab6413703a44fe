"""The public calculations: validate the input, compute, and return a labelled xarray Dataset.

Each function here is thin: the work is done in `solubility.calc` and the Dataset is built in
`solubility.results`.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping, Sequence

from solubility.calc.inputs import MAX_TEMPERATURES
from solubility.errors import InputError

__all__ = ["fit", "fit_band", "fit_sites", "solvus", "surface_map", "uptake"]


def solvus(database, phase: str, solute: str, temperatures, *, exclude: Sequence[str] = (),
           fix: Mapping[str, float] | None = None, pressure: float = 101325.0, balance: str | None = None,
           celsius: bool = False, parameters: Mapping[str, float] | None = None,
           max_temperatures: int | None = MAX_TEMPERATURES, progress: Callable[[float], None] | None = None):
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
    progress
        Called with each temperature (K) before it is solved (a progress bar); it may raise to stop the line.

    Returns
    -------
    xarray.Dataset
        Dims ``T``; variables X (mole fraction), W (mass fraction), PPM (ppm by mass), Y (site fraction of the
        solute on its sublattice), partner, converged, reason, MU (J/mol); partner changes in
        ``partner_change_T`` along ``change``; the lower end of the host's field (``X_LOW``, ``partner_low``, ...),
        its partner changes (``partner_low_change_T`` along ``change_low``) and where the field opens or closes
        (``field_end_T``), see `solubility.results.lower_end`. A temperature where the host is not stable holds NaN
        and a reason, never a number. With `parameters`, their values are in the attr ``parameters`` (JSON).
    """
    from solubility.calc import boundary
    from solubility.calc.host import prepare_host
    from solubility.calc.inputs import parse_temperatures
    from solubility.results.dataset import build_dataset

    T = parse_temperatures(temperatures, celsius=celsius, max_count=max_temperatures)
    req = prepare_host(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance,
                       parameters=parameters)
    line = boundary.solvus_line(req, T, hooks=progress)
    ds = build_dataset(line, req)
    if req.parameters:  # provenance: the values the free parameters had (JSON, flat attrs)
        ds.attrs["parameters"] = json.dumps(dict(req.parameters))
    return ds


def fit(data, database, phase: str, solute: str, free: str, *, start: Mapping[str, float] | None = None,
        bounds: Mapping[str, tuple[float, float]] | None = None, exclude: Sequence[str] = (),
        pressure: float = 101325.0, database_text: str | None = None):
    """Fit free symbols of one parameter expression to measured solubility (least squares in ln x).

    Parameters
    ----------
    data
        CSV file: ``T_K``; one of ``x``, ``wt_percent``, ``ppm``; optional ``partner`` (a solvus point),
        ``p_Pa`` (in equilibrium with the pure diatomic gas at that partial pressure, Pa), ``activity`` (at that
        activity against the element's reference state), ``sigma_rel`` (relative standard uncertainty),
        ``source`` (`solubility.calc.fit_data.read_fit_data`).
    database, phase, solute, exclude, pressure
        As in `solvus`.
    free
        ``'G(PHASE,M:X;0)=EXPR'``; EXPR may use the database's FUNCTIONs and names the free symbols
        (``GHSERFE#+3*GHSERCC#+A+B*T``): every name that is no FUNCTION of the database is fitted.
    start, bounds
        Starting values (default 0) and (low, high) bounds by symbol name.
    database_text
        TDB text to use instead of the database's file (a model built in memory); `database` then only names it.

    Returns
    -------
    solubility.calc.fitting.FitResult
        ``to_dict()`` gives parameters {name: {value, stderr}}, covariance, residuals, chi2, n_points, aic, bic;
        `solubility.calc.fitting.fitted_database_text` the database with the fitted values.
    """
    from solubility.calc.fitting import database_text as text_of
    from solubility.calc.fitting import fit_solvus, free_database, read_fit_data
    from solubility.calc.host import prepare_host

    key, sep, expr = str(free).partition("=")
    if not sep or not key.strip() or not expr.strip():
        raise InputError(f"free parameter {free!r} is not 'G(PHASE,M:X;0)=EXPRESSION'")
    text = text_of(database) if database_text is None else database_text
    ldb, names = free_database(database, key.strip(), expr.strip(), text=text)
    given = {str(k).upper(): float(v) for k, v in (start or {}).items()}
    unknown = sorted(set(given) - set(names))
    if unknown:
        raise InputError(f"starting value for {unknown[0]}, which is not a free symbol of the expression "
                         f"({', '.join(names)})")
    values = {n: given.get(n, 0.0) for n in names}
    req = prepare_host(ldb, phase, solute, exclude=exclude, pressure=pressure, parameters=values,
                       need_partner=False)
    masses = dict(zip(req.system.elements, (float(m) for m in req.system.molar_masses), strict=True))
    dat = read_fit_data(data, molar_masses=masses, solute=req.solute, host=req.balance)
    if dat.has_solvus and not req.others:
        raise InputError(f"the data hold solvus points but no phase other than {req.phase} can form here; give "
                         "p_Pa or activity for points against a gas or at an activity")
    result = fit_solvus(req, dat, values, {str(k).upper(): v for k, v in (bounds or {}).items()})
    name = database if isinstance(database, str) and database_text is not None else ldb.name
    result.extra.update({"database": str(name), "phase": req.phase, "solute": req.solute, "free": str(free)})
    result.free_key, result.free_expression, result.base_text = key.strip(), expr.strip(), text
    return result


def fit_sites(data, database, phase: str, solute: str, free: str, sites: Sequence[str], *,
              structure: str | None = None, start: Mapping[str, float] | None = None,
              bounds: Mapping[str, tuple[float, float]] | None = None, exclude: Sequence[str] = (),
              pressure: float = 101325.0):
    """Fit the same data under several site choices of the host phase and compare them.

    Parameters
    ----------
    sites
        Site choices ``KIND`` or ``KIND:BLOCKING`` (e.g. ``["octahedral", "tetrahedral"]``). Each gives the
        interstitial site ratio c = a n (1 - b) of `structure`; the database's `phase` is re-expressed for it
        (`solubility.calc.fit_compare`: interactions holding the solute set to zero) before the fit.
    free
        As in `fit`; ``{c}`` in the expression stands for each choice's site ratio (so ``GHSERFE#+{c}*(A+B*T)``
        fits A and B per mole of solute, comparable between the choices).
    structure
        fcc, bcc, hcp, sc, diamond or a structure file; default from the phase name (BCC_A2 -> bcc).
    data, database, phase, solute, start, bounds, exclude, pressure
        As in `fit`.

    Returns
    -------
    solubility.calc.fit_compare.SiteComparison
        ``table()`` the fits side by side (parameters with standard errors, chi2, AIC, BIC), ``verdict()`` whether
        the data tell the choices apart, ``to_dict()`` for JSON.
    """
    from solubility.calc.fit_compare import SiteChoice, SiteComparison, site_database_text, structure_of
    from solubility.databases.reader import check_phases, load_database

    choices = tuple(SiteChoice.parse(s) for s in sites)
    if not choices:
        raise InputError("give at least one site choice (KIND or KIND:BLOCKING)")
    if len(set(choices)) != len(choices):
        raise InputError("a site choice is given twice")
    ldb = load_database(database)
    (ph,) = check_phases(ldb, [str(phase).strip().upper()])
    _, species = ldb.sublattices(ph)
    hosts = [e for e in species[0] if e != "VA"]
    if len(hosts) != 1:
        raise InputError(f"phase {ph} holds {', '.join(hosts)} on its first sublattice; site choices are compared "
                         "for one host element")
    lattice = structure or structure_of(ph)
    texts, cs, results = [], [], []
    for ch in choices:
        text, c, dropped = site_database_text(database, ph, hosts[0], str(solute).strip().upper(), lattice, ch)
        texts.append(text)
        cs.append(c)
        results.append(fit(data, ldb.name, ph, solute, str(free).replace("{c}", f"{c:.15g}"), start=start,
                           bounds=bounds, exclude=exclude, pressure=pressure, database_text=text))
        results[-1].extra.update({"site": ch.kind, "blocking": ch.blocking, "c": c, "interactions_dropped": dropped})
    return SiteComparison(choices, tuple(cs), tuple(results), lattice)


def fit_band(result, temperatures, *, line: str | None = None, confidence: float = 0.95, samples=None,
             celsius: bool = False):
    """The fitted solvus or uptake line over `temperatures` with its uncertainty band.

    Parameters
    ----------
    result
        A fit from `fit` (or one entry of `fit_sites`).
    temperatures
        K (Celsius with ``celsius=True``): a sequence or "START:STOP:STEP".
    line
        ``solvus``, ``p_Pa=VALUE`` (uptake from X2 at that partial pressure, Pa) or ``activity=VALUE``; default:
        the one condition of the data.
    confidence
        Two-sided confidence of the bounds, 0 < confidence < 1 (default 0.95).
    samples
        None: the fitted covariance, linearised. A CSV file (one column per free symbol, e.g. an MCMC trace) or
        an array (m, k): the bounds are the quantiles of the lines at the samples.

    Returns
    -------
    xarray.Dataset
        X, X_LOWER, X_UPPER, PPM, PPM_LOWER, PPM_UPPER, SIGMA_LNX over ``T``; attrs ``confidence``,
        ``band_method``, ``band_line``, ``parameters``, ``covariance`` (`solubility.results.fit_dataset`).
    """
    import numpy as np

    from solubility.calc.fit_bands import band_condition, compute_band, read_samples
    from solubility.calc.inputs import parse_temperatures
    from solubility.results.fit_dataset import build_band_dataset

    T = parse_temperatures(temperatures, celsius=celsius)
    try:
        conf = float(confidence)
    except (TypeError, ValueError):
        raise InputError(f"confidence {confidence!r} is not a number (0 < confidence < 1)") from None
    cond = band_condition(line, result.data)
    if samples is not None and not isinstance(samples, np.ndarray):
        samples = read_samples(samples, result.names)
    band = compute_band(result, T, cond, confidence=conf, samples=samples)
    return build_band_dataset(band, result)


def uptake(database, phase: str, solute: str, temperatures, *, activity: float | None = None,
           reference: str | None = None, partial_pressure: float | None = None, atmosphere=None,
           equilibrate_gas: bool = False, exclude: Sequence[str] = (), fix: Mapping[str, float] | None = None,
           pressure: float = 101325.0, balance: str | None = None, celsius: bool = False,
           sieverts_range: tuple[float, float] | None = None, progress: Callable[[float], None] | None = None):
    """Solute content of the host `phase` in equilibrium with its surroundings, against temperature.

    Give exactly one of `activity`, `partial_pressure` or `atmosphere`.

    Parameters
    ----------
    database
        Path to a TDB file, the name of a bundled database, or a pycalphad Database.
    phase
        Host phase, a (hosts)a(X,VA)c solution such as FCC_A1.
    solute
        Interstitial element, such as "N".
    temperatures
        K (Celsius with ``celsius=True``): a sequence, or "START:STOP:STEP" with STOP included.
    activity
        The solute's activity (> 0) against `reference`.
    reference
        A phase of the database formed from the solute alone (e.g. GRAPHITE). Default: the element's reference
        state (the database's graphite for C; 1/2 X2 gas at 1 bar for H, N and O).
    partial_pressure
        Pa, of the pure diatomic gas X2 (H2, N2, O2): mu_X = 1/2 G(X2, T, 1 bar) + 1/2 R T ln(p / 1 bar).
    atmosphere
        Partial pressures of a gas mixture, Pa, as "NH3=0.3e5,H2=0.7e5" or a mapping. The solute's potential
        follows from NH3 = N + 3/2 H2 (the nitriding potential K_N = p(NH3) / p(H2)^1.5, atm^-1/2),
        2 CO = C + CO2 or CH4 = C + 2 H2 (carbon activity), H2O = O + H2 or CO2 = O + CO.
    equilibrate_gas
        Bring the atmosphere to gas-phase equilibrium first (default: taken as given, the trade's convention for
        nitriding and carburising gases, which are far from gas equilibrium).
    exclude, fix, pressure, balance
        As for `solubility.solvus`: phases not allowed, u-fractions of other host elements, total pressure (Pa)
        on the host, the host's balance element.
    sieverts_range
        (T_min, T_max), K, over which the apparent enthalpy of solution is fitted (partial pressure only).
    progress
        Called with each temperature (K) before it is solved (a progress bar); it may raise to stop the line.

    Returns
    -------
    xarray.Dataset
        Dims ``T``: X, W, PPM, Y, activity, MU_SOLUTE, status (ok / metastable / below_limit / failed), reason,
        forms_instead, DF_MAX, MU; Sieverts constants KS_X, KS_CM3, KS_PPM for a partial pressure; ``derived``
        (nitriding potential, carbon activity, ...) for an atmosphere. Attrs name the gas data's source.
    """
    from solubility.calc.inputs import parse_temperatures
    from solubility.calc.surroundings import Surroundings, _open_host, compute_uptake, solute_potential
    from solubility.errors import InputError
    from solubility.results.uptake_dataset import build_uptake_dataset

    sur = Surroundings.check(activity=activity, reference=reference, partial_pressure=partial_pressure,
                             atmosphere=atmosphere, equilibrate_gas=equilibrate_gas)
    T = parse_temperatures(temperatures, celsius=celsius)
    if sieverts_range is not None:
        try:
            lo, hi = (float(v) for v in sieverts_range)
        except (TypeError, ValueError):
            raise InputError(f"sieverts_range {sieverts_range!r} is not (T_min, T_max) in K") from None
        if not 0 < lo < hi:
            raise InputError(f"sieverts_range {sieverts_range!r} must satisfy 0 < T_min < T_max (K)")
        sieverts_range = (lo, hi)
    job = _open_host(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance)
    potential = solute_potential(job.database, job.solute, sur, job.pressure)
    line = compute_uptake(job, potential, T, progress=progress)
    return build_uptake_dataset(line, job, sur, sieverts_range=sieverts_range)


def surface_map(database, phase: str, solute: str, temperatures, *, phases: Sequence[str] | None = None,
                quantity: str | None = None, limits: tuple[float, float] | None = None, exclude: Sequence[str] = (),
                fix: Mapping[str, float] | None = None, pressure: float = 101325.0, balance: str | None = None,
                celsius: bool = False, points: int = 48, progress: Callable[[float], None] | None = None):
    """The stable phase at the surface against the solute's potential and temperature, from exact boundaries.

    The metal is conserved and the solute exchanged with the surroundings: at each temperature the map phases
    are compared by their grand potential per mole of metal, and each change of the stable phase is solved as an
    exact two-phase equilibrium (`solubility.calc.surface`). For nitrogen on a steel database with the phases
    ferrite, austenite, Fe4N and epsilon this is the nitriding map in K_N against temperature.

    Parameters
    ----------
    database, phase, solute, temperatures, exclude, fix, pressure, balance, celsius
        As for `uptake`; `phase` is the host (the first map phase).
    phases
        Further map phases, each a (hosts)a(X,VA)c solution of the same metal with the solute (for example
        FCC_A1, FE4N_LP10, HCP_A3). Every other candidate is checked inside each interval and named in ``forms``.
    quantity
        The potential axis: "activity" (against the element's reference state), "p_X2" (equivalent pressure of
        the diatomic gas, Pa; H, N, O) or "K_N" (nitriding potential, atm^-1/2; N). Default: K_N for N, p_X2 for H
        and O, activity otherwise.
    limits
        (low, high) of the axis, in its units. Default: K_N 1e-3..1e2, p_X2 1e2..1e10 Pa, activity 1e-4..1e2.
    points
        Grid points in ln a that bracket the boundaries (8 to 2000); the boundaries themselves are exact.
    progress
        Called with each temperature (K) before it is mapped.

    Returns
    -------
    xarray.Dataset
        Dims ``T`` and ``region``: phase, forms, lower, upper (axis units), lower_activity, upper_activity
        (`solubility.results.surface_dataset`).
    """
    import math
    import warnings

    from solubility.calc.host import prepare_host
    from solubility.calc.inputs import parse_temperatures
    from solubility.calc.surface import QUANTITIES, quantity_axis, surface_columns
    from solubility.calc.surroundings import Surroundings, solute_potential
    from solubility.results.surface_dataset import build_surface_dataset

    T = parse_temperatures(temperatures, celsius=celsius)
    host = prepare_host(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance,
                        need_partner=False)
    names = [host.phase]
    for p in phases or ():
        name = str(p).strip().upper()
        if name and name not in names:
            names.append(name)
    jobs = {host.phase: host}
    with warnings.catch_warnings():  # the database's notes were given once, for the host
        warnings.simplefilter("ignore", UserWarning)
        for name in names[1:]:
            jobs[name] = prepare_host(host.database, name, solute, exclude=exclude, fix=fix, pressure=pressure,
                                      balance=host.balance, need_partner=False)
    sol = host.solute
    quantity = quantity or ("K_N" if sol == "N" else "p_X2" if sol in ("H", "O") else "activity")
    pot = solute_potential(host.database, sol, Surroundings("activity", 1.0), host.pressure)
    to_ln_a, from_ln_a = quantity_axis(sol, quantity, pot.ref_gibbs)
    default = {"K_N": (1e-3, 1e2), "p_X2": (1e2, 1e10), "activity": (1e-4, 1e2)}[quantity]
    try:
        lo, hi = (float(v) for v in (limits if limits is not None else default))
    except (TypeError, ValueError):
        raise InputError(f"limits {limits!r} is not (low, high) of the {quantity} axis") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise InputError(f"limits {limits!r} must satisfy 0 < low < high (finite)")
    if not 8 <= int(points) <= 2000:
        raise InputError(f"points {points!r} is not accepted; give 8 to 2000")
    fixed = dict(host.fix)
    weights = {**fixed, host.balance: 1.0 - sum(fixed.values())}
    columns = surface_columns(jobs, weights, pot.ref_gibbs, T, lambda t: (to_ln_a(t, lo), to_ln_a(t, hi)),
                              points=int(points), progress=progress)
    units, long_name = QUANTITIES[quantity]
    return build_surface_dataset(columns, host, quantity=quantity, units=units,
                                 long_name=long_name.format(X=sol, ref=pot.ref_text), from_ln_a=from_ln_a,
                                 reference=pot.ref_text, gas_source=pot.gas_source, map_phases=names)
