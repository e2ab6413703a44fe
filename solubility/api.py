"""The public calculations: validate the input, compute, and return a labelled xarray Dataset.

Each function here is thin: the work is done in `solubility.calc` and the Dataset is built in
`solubility.results`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from solubility.calc.inputs import MAX_TEMPERATURES

__all__ = ["solvus"]


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
        reason, never a number.
    """
    from solubility.calc import boundary
    from solubility.calc.host import prepare_host
    from solubility.calc.inputs import parse_temperatures
    from solubility.results.dataset import build_dataset

    T = parse_temperatures(temperatures, celsius=celsius, max_count=max_temperatures)
    req = prepare_host(database, phase, solute, exclude=exclude, fix=fix, pressure=pressure, balance=balance,
                       parameters=parameters)
    line = boundary.solvus_line(req, T)
    return build_dataset(line, req)
