"""The kind of a sweep case (``"solvus"`` or ``"uptake"``) and the uptake keys, checked as `solubility.uptake` does.

An uptake case gives exactly one of ``activity`` (> 0, against ``reference``, a phase of the solute alone),
``partial_pressure`` (Pa, > 0, of the diatomic gas X2) or ``atmosphere`` (``"NH3=0.3e5,H2=0.7e5"`` or a table
of species = Pa; ``equilibrate_gas`` brings it to gas equilibrium first). A solvus case gives none of them.
The values are checked by `solubility.calc.surroundings.Surroundings.check`, the validator of `solubility.uptake`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from solubility.errors import InputError, JobError

__all__ = ["KINDS", "KIND_KEYS", "UPTAKE_KEYS", "check_kind", "uptake_arguments"]

KINDS = ("solvus", "uptake")
UPTAKE_KEYS = ("activity", "reference", "partial_pressure", "atmosphere", "equilibrate_gas")
KIND_KEYS = ("kind", *UPTAKE_KEYS)
_SOURCES = ("activity", "partial_pressure", "atmosphere")


def _given(values: Mapping[str, Any], key: str) -> bool:
    return values[key] is not None and not (key == "equilibrate_gas" and values[key] is False)


def check_kind(values: Mapping[str, Any], where: str) -> dict[str, Any]:
    """The kind keys of a case normalized (atmosphere as canonical ``"SPECIES=PA,..."`` text), or a JobError
    ``"{where}: key 'KEY': ..."`` naming the first bad key."""
    def fail(key: str, text: str) -> JobError:
        return JobError(f"{where}: key {key!r}: {text}")

    kind = values["kind"]
    if not isinstance(kind, str) or kind.strip().lower() not in KINDS:
        raise fail("kind", f"{kind!r} is not a case kind (accepted: {', '.join(KINDS)})")
    out = {**values, "kind": kind.strip().lower()}
    if out["kind"] == "solvus":
        for key in UPTAKE_KEYS:
            if _given(values, key):
                raise fail(key, "applies to uptake cases only (set kind = \"uptake\")")
        return out
    given = [k for k in _SOURCES if values[k] is not None]
    if not given:
        raise fail("kind", "an uptake case needs exactly one of activity, partial_pressure or atmosphere")
    if len(given) > 1:
        raise fail(given[1], f"give exactly one of activity, partial_pressure or atmosphere (got {', '.join(given)})")
    for key in ("activity", "partial_pressure"):
        if values[key] is not None and (isinstance(values[key], bool) or not isinstance(values[key], int | float)):
            raise fail(key, f"expected a number, got {values[key]!r}")
    if not isinstance(values["equilibrate_gas"], bool):
        raise fail("equilibrate_gas", f"expected true or false, got {values['equilibrate_gas']!r}")
    if values["reference"] is not None and not isinstance(values["reference"], str):
        raise fail("reference", f"expected a phase name, got {values['reference']!r}")
    from solubility.calc.surroundings import Surroundings

    for key in (given[0], "reference", "equilibrate_gas"):  # the value's own check first, then how they combine
        try:
            if key == given[0]:
                sur = Surroundings.check(**{key: values[key]})
            elif _given(values, key):
                Surroundings.check(**{k: values[k] for k in ("reference", "equilibrate_gas", given[0])})
        except InputError as exc:
            raise fail(key, str(exc)) from None
    if sur.atmosphere is not None:
        out["atmosphere"] = ",".join(f"{k}={v!r}" for k, v in sur.atmosphere.pressures.items())
    else:
        out[given[0]] = float(sur.value)
    if sur.kind == "activity" and values["reference"] is not None:
        out["reference"] = values["reference"].strip().upper()
    return out


def uptake_arguments(case: Any) -> dict[str, Any]:
    """The keyword arguments of `solubility.uptake` that set the surroundings of an uptake case."""
    return {k: getattr(case, k) for k in UPTAKE_KEYS if _given({k: getattr(case, k)}, k)}
