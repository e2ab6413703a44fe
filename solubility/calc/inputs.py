"""The one validator of user input, shared by the API, the command line and job files.

Everything the user gives is checked here, before any equilibrium work, with one-line errors that name the bad
value and what is accepted. Module-level imports are light (numpy): job files are checked without pycalphad.
"""

from __future__ import annotations

import math
import re
from collections import OrderedDict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from solubility.constants import ZERO_CELSIUS
from solubility.errors import InputError

__all__ = [
    "MAX_TEMPERATURES",
    "CheckedRequest",
    "check_fix",
    "check_parameters",
    "check_pressure",
    "check_request",
    "host_elements",
    "parse_temperatures",
]

#: most temperatures in one request unless the caller lifts the limit (a line of 20,000 points takes minutes;
#: a mistyped step such as 1:2000:0.0001 should be refused, not started)
MAX_TEMPERATURES = 20_000
_RANGE = re.compile(r"^\s*([^:]+):([^:]+):([^:]+)\s*$")


@dataclass(frozen=True)
class CheckedRequest:
    """A host request whose every value was checked against its database (nothing compiled yet)."""

    database: object  # LoadedDatabase
    phase: str
    solute: str
    balance: str
    fix: tuple[tuple[str, float], ...]  # (element, u-fraction), sorted
    exclude: tuple[str, ...]
    pressure: float  # Pa
    parameters: tuple[tuple[str, float], ...]  # (free parameter name, value), sorted
    elements: tuple[str, ...]  # sorted
    candidates: tuple[str, ...]  # phases that may appear, the host included, sorted
    family: tuple[str, ...] = ()  # ordered phases whose disordered state is the host's phase
    notes: tuple[str, ...] = ()  # what the user must know about the database (also warned and put in attrs)
    work: object = None  # the pycalphad Database reduced to `elements`: models are built from it (fast)


def check_fix(fix: Mapping[str, float] | None) -> dict[str, float]:
    """u-fractions as {ELEMENT: u}: each in (0, 1), each element once, summing to less than 1."""
    if fix is None:
        return {}
    if not isinstance(fix, Mapping):
        raise InputError(f"fix {fix!r} is not a mapping of element to u-fraction, e.g. {{'CR': 0.02}}")
    out: dict[str, float] = {}
    for el, val in fix.items():
        name = str(el).strip().upper()
        try:
            u = float(val)
        except (TypeError, ValueError):
            raise InputError(f"fix {el}={val!r} is not a number; give a u-fraction in (0, 1)") from None
        if not math.isfinite(u) or not 0.0 < u < 1.0:
            raise InputError(f"fix {el}={val!r} is outside (0, 1); give a u-fraction in (0, 1)")
        if name in out:
            raise InputError(f"fix names {name} twice")
        out[name] = u
    total = sum(out.values())
    if total >= 1.0:
        raise InputError(f"fix contents sum to {total:g}; they must sum to less than 1 (the balance takes the rest)")
    return out


def check_pressure(pressure: float) -> float:
    """`pressure` as a float, Pa; refused unless finite and > 0."""
    try:
        p = float(pressure)
    except (TypeError, ValueError):
        raise InputError(f"pressure {pressure!r} is not a number; give Pa > 0") from None
    if not math.isfinite(p) or p <= 0:
        raise InputError(f"pressure {pressure!r} must be a finite number of Pa > 0")
    return p


def check_parameters(parameters: Mapping[str, float] | None) -> dict[str, float]:
    """Free model parameters as {NAME: value}; names are database symbols (upper case), values finite."""
    if parameters is None:
        return {}
    if not isinstance(parameters, Mapping):
        raise InputError(f"parameters {parameters!r} is not a mapping of symbol name to value, e.g. {{'V1': -3.0}}")
    out: dict[str, float] = {}
    for name, val in parameters.items():
        key = str(name).strip().upper()
        if not key or not (key[0].isalpha() or key[0] == "_"):
            raise InputError(f"parameter name {name!r} is not a symbol name")
        try:
            value = float(val)
        except (TypeError, ValueError):
            raise InputError(f"parameter {name}={val!r} is not a number") from None
        if not math.isfinite(value):
            raise InputError(f"parameter {name}={val!r} is not a finite number")
        if key in out:
            raise InputError(f"parameters name {key} twice")
        out[key] = value
    return out


def _substitutional_elements(species, solute: str) -> tuple[int, list[str]]:
    """Index of the interstitial sublattice and the substitutional elements of a (hosts)a(X,VA)c phase."""
    inter = [i for i, sp in enumerate(species) if "VA" in sp and solute in sp]
    if not inter:
        raise InputError(f"no sublattice holding {solute} and VA")
    subst = sorted({el for i, sp in enumerate(species) if i != inter[0] for el in sp if el != "VA"})
    return inter[0], subst


def host_elements(ldb, phase: str, solute: str, fix: dict[str, float], balance: str | None) -> str:
    """The host's balance element, after checking that `phase` is (hosts)a(`solute`,VA)c and `fix` fits it."""
    from solubility.databases.reader import check_elements

    _, species = ldb.sublattices(phase)
    try:
        _, subst = _substitutional_elements(species, solute)
    except InputError:
        held = " : ".join(",".join(sp) for sp in species)
        raise InputError(
            f"phase {phase} ({held}) has no interstitial sublattice holding {solute} and VA; "
            f"a host phase must be (hosts)a({solute},VA)c"
        ) from None
    for el in fix:
        if el not in subst:
            raise InputError(f"fix element {el} is not on a substitutional sublattice of {phase}; "
                             f"those hold {', '.join(subst)}")
    if balance is not None:
        (balance,) = check_elements(ldb, [balance])
        if balance not in subst:
            raise InputError(f"balance element {balance} is not on a substitutional sublattice of {phase}; "
                             f"those hold {', '.join(subst)}")
        if balance in fix:
            raise InputError(f"balance element {balance} is also given in fix")
        return balance
    rest = [el for el in subst if el not in fix]
    if not rest:
        raise InputError(f"fix gives every element of the substitutional sublattice of {phase} "
                         f"({', '.join(subst)}); leave one out as the balance, which takes the rest")
    if len(rest) != 1:
        raise InputError(
            f"host phase {phase} holds {', '.join(rest)} on its substitutional sublattice besides the fixed "
            "elements; say which is the balance (balance=... or --balance EL)"
        )
    return rest[0]


def check_request(database, phase: str, solute: str, *, exclude: Sequence[str] = (),
                  fix: Mapping[str, float] | None = None, pressure: float = 101325.0,
                  balance: str | None = None, parameters: Mapping[str, float] | None = None,
                  need_partner: bool = True) -> CheckedRequest:
    """Check a host request against its database: phase, solute, excluded phases, fix, pressure, balance.

    `need_partner`: a solvus needs a second candidate phase; uptake at a set potential does not.

    Raises
    ------
    InputError, DatabaseError
        Any bad value, named in a one-line message.
    """
    from solubility.databases.reader import check_elements, check_phases, load_database
    from solubility.thermo.checks import MAX_LISTED, missing_endmembers
    from solubility.thermo.ordering import choose_phases, disordered_of
    from solubility.thermo.system import filter_candidate_phases

    ldb = load_database(database)
    if not isinstance(phase, str) or not phase.strip():
        raise InputError(f"phase {phase!r} is not a phase name")
    (phase,) = check_phases(ldb, [phase.strip().upper()])
    if not isinstance(solute, str) or not solute.strip():
        raise InputError(f"solute {solute!r} is not an element name")
    (solute,) = check_elements(ldb, [solute.strip().upper()])
    if solute == "VA":
        raise InputError("solute VA is the vacancy, not an element; give an interstitial element such as C")
    if isinstance(exclude, str):
        exclude = [exclude]
    for p_name in exclude or ():
        if not isinstance(p_name, str) or not p_name.strip():
            raise InputError(f"excluded phase {p_name!r} is not a phase name")
    excluded = check_phases(ldb, [str(p).strip().upper() for p in exclude]) if exclude else ()
    if phase in excluded:
        raise InputError(f"host phase {phase} is also excluded")
    fixed = check_fix(fix)
    check_elements(ldb, list(fixed))
    if solute in fixed:
        raise InputError(f"solute {solute} cannot also be fixed")
    p = check_pressure(pressure)
    params = check_parameters(parameters)
    named = phase
    phase = disordered_of(ldb.db, phase) or phase  # an ordered name: its disordered state is the host
    bal = host_elements(ldb, phase, solute, fixed, balance)
    elements = sorted({bal, solute, *fixed})
    work = working_database(ldb, elements)
    choice = choose_phases(work, elements, phase, [p_ for p_ in excluded if p_ != named])
    candidates = list(choice.candidates)
    if phase not in filter_candidate_phases(work, elements, [phase]):
        raise InputError(f"host phase {named} cannot form from {', '.join(elements)}")
    missing = missing_endmembers(work, phase, elements)
    if missing:
        raise InputError(f"host phase {phase} has no {', '.join(missing)} in the database (pycalphad would take "
                         "it as zero); add the parameter or choose another host")
    if need_partner and len(candidates) < 2:
        raise InputError(f"no candidate partner phase for {phase} from {', '.join(elements)} once "
                         f"{', '.join(excluded) or 'nothing'} is excluded")
    notes = list(choice.warnings)
    gaps = {p_: missing_endmembers(work, p_, elements) for p_ in candidates if p_ != phase}
    gaps = {p_: m for p_, m in gaps.items() if m}
    if gaps:
        notes.append("end-members missing (taken as zero by pycalphad) in candidate phases: " + "; ".join(
            f"{p_} {', '.join(m[:MAX_LISTED])}" + (f" and {len(m) - MAX_LISTED} more" if len(m) > MAX_LISTED
                                                    else "") for p_, m in sorted(gaps.items())))
    return CheckedRequest(ldb, phase, solute, bal, tuple(sorted(fixed.items())), tuple(excluded), p,
                          tuple(sorted(params.items())), tuple(elements), tuple(candidates),
                          choice.host_family, tuple(notes), work)


#: reduced databases kept per process, by (file sha256, elements)
_WORK: OrderedDict[tuple, object] = OrderedDict()
_WORK_SIZE = 16


def working_database(ldb, elements: Sequence[str]):
    """`ldb`'s pycalphad Database reduced to `elements` (`solubility.databases.reduce.reduce_database`).

    A model built from it equals the one built from the whole database (the reduction keeps every phase,
    constituent, parameter and FUNCTION the elements can use), and is built many times faster from a large one:
    pycalphad searches the whole parameter table for every term. Kept per process for a database read from a
    file (keyed by its sha256); an in-memory Database, which may change, is reduced afresh. A database with no
    other element is used as it is.
    """
    from solubility.databases.reduce import reduce_database

    if not {str(e).upper() for e in ldb.db.elements} - {*elements, "VA", "/-"}:
        return ldb.db  # nothing to cut away
    key = None if ldb.sha256 is None else (ldb.sha256, tuple(sorted(elements)))
    if key is not None and key in _WORK:
        _WORK.move_to_end(key)
        return _WORK[key]
    work = reduce_database(ldb.db, elements)
    if key is not None:
        _WORK[key] = work
        while len(_WORK) > _WORK_SIZE:
            _WORK.popitem(last=False)
    return work


# ---------------------------------------------------------------------- temperatures
def _number(text: str, what: str) -> float:
    try:
        value = float(text)
    except (TypeError, ValueError):
        raise InputError(f"temperature {what} {text!r} is not a number") from None
    if not math.isfinite(value):
        raise InputError(f"temperature {what} {text!r} is not a finite number")
    return value


def _range(start: float, stop: float, step: float, spec: str, max_count: int | None) -> np.ndarray:
    if step <= 0:
        raise InputError(f"temperatures {spec!r}: STEP must be > 0")
    if stop < start:
        raise InputError(f"temperatures {spec!r}: STOP is below START; give START:STOP:STEP with START <= STOP")
    with np.errstate(over="ignore"):
        span = np.float64(stop) - np.float64(start)
        count = span / np.float64(step) + 1e-9  # inf when it overflows
    if not math.isfinite(span):
        raise InputError(f"temperatures {spec!r}: STOP - START is beyond the range of floating-point numbers; "
                         "give temperatures in K (> 0) a finite distance apart")
    if not math.isfinite(count) or count >= 2.0**53:
        shown = "more than 1.8e308" if not math.isfinite(count) else f"{count:.3g}"
        limit = max_count if max_count is not None else "2**53"
        raise InputError(f"temperatures {spec!r} give {shown} points; at most {limit} are accepted")
    n = math.floor(count) + 1
    _check_count(n, spec, max_count)
    values = start + step * np.arange(n)
    if n > 1 and np.unique(values).size != n:
        raise InputError(f"temperatures {spec!r}: STEP {step:g} is too small to tell the points apart at "
                         f"{start:g}; give a larger STEP")
    return values


def _check_count(n: int, spec, max_count: int | None) -> None:
    if max_count is not None and n > max_count:
        shown = f"{n}" if n < 10**12 else f"{float(n):.3g}"
        raise InputError(f"temperatures {str(spec)[:60]!r} give {shown} points; at most {max_count} are accepted "
                         "unless the limit is lifted (max_temperatures=None in the API)")


def parse_temperatures(spec, *, celsius: bool = False, max_count: int | None = MAX_TEMPERATURES) -> np.ndarray:
    """Temperatures in K from a spec.

    Parameters
    ----------
    spec
        "START:STOP:STEP" (STOP included when it lies on the grid), a comma-separated string, a number, or a
        sequence of numbers.
    celsius
        The numbers are degrees Celsius.
    max_count
        Most temperatures accepted (`MAX_TEMPERATURES` by default); None lifts the limit.

    Returns
    -------
    numpy.ndarray
        1-D, K, in the order given; every value > 0 K.
    """
    if isinstance(spec, str):
        m = _RANGE.match(spec)
        if m:
            start, stop, step = (_number(t, w) for t, w in zip(m.groups(), ("START", "STOP", "STEP"), strict=True))
            values = _range(start, stop, step, spec, max_count)
        elif ":" in spec:
            raise InputError(f"temperatures {spec!r} are not START:STOP:STEP or a comma-separated list")
        else:
            parts = [p for p in spec.replace(",", " ").split() if p]
            if not parts:
                raise InputError("temperatures are empty; give START:STOP:STEP or a list of numbers")
            values = np.array([_number(p, "value") for p in parts])
    else:
        items = spec if isinstance(spec, list | tuple) else [spec]
        flags = getattr(getattr(spec, "dtype", None), "kind", "") == "b"
        if flags or any(isinstance(v, bool | np.bool_) for v in items):
            raise InputError(f"temperatures {str(spec)[:60]!r} hold true/false; give numbers in K")
        try:
            values = np.atleast_1d(np.asarray(spec, dtype=float))
        except (TypeError, ValueError):
            raise InputError(f"temperatures {spec!r} are not numbers") from None
        if values.ndim != 1:
            raise InputError(f"temperatures must be one-dimensional, got shape {values.shape}")
        if values.size == 0:
            raise InputError("temperatures are empty; give START:STOP:STEP or a list of numbers")
        if not np.all(np.isfinite(values)):
            raise InputError(f"temperatures {spec!r} hold a value that is not a finite number")
    _check_count(values.size, spec, max_count)
    if celsius:
        values = values + ZERO_CELSIUS
    if np.any(values <= 0):
        bad = float(values[values <= 0][0]) - (ZERO_CELSIUS if celsius else 0.0)
        unit = "C" if celsius else "K"
        raise InputError(f"temperature {bad:g} {unit} is at or below absolute zero; temperatures must be > 0 K")
    if np.unique(values).size != values.size:
        raise InputError("temperatures repeat a value; give each temperature once")
    return values
