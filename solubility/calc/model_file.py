"""Complete database text for an interstitial model: stand-alone, or a base database with the phase added.

`model_database_text` joins the models layer (pure TDB text) to a loaded database: its ELEMENT data, its
FUNCTIONs, and the parameters of an existing phase, re-expressed for the model's site ratio when it differs
(`solubility.models.site_ratio`).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from solubility.errors import InputError
from solubility.models.site_ratio import concentrated_shift, convert_site_ratio
from solubility.models.sublattice import SublatticeModel
from solubility.models.tdb_commands import parameters_of
from solubility.models.tdb_writer import extend_tdb, normalise_parameters, standalone_tdb

__all__ = ["GAS_ELEMENT_DATA", "SHIFT_FRACTIONS", "model_database_text"]

#: mole fractions at which the move of the concentrated behaviour is reported
SHIFT_FRACTIONS = (1e-3, 1e-2, 0.05, 0.1)


def _gas_element(name: str, molecule: str, mass: float, h298_molecule: float) -> tuple[str, float, float, float]:
    from solubility.thermo.gas import S298_HALF

    return (f"1/2_MOLE_{molecule}(GAS)", mass, h298_molecule / 2.0, S298_HALF[name])


#: ELEMENT data of the gaseous interstitials, used when the source database does not hold the element:
#: reference state 1/2 X2 gas (the SGTE convention), standard atomic weight (IUPAC, g/mol), H(298.15) - H(0) and
#: S(298.15) of half a mole of X2 (NIST-JANAF, Chase 1998: H2 8468, N2 8670, O2 8683 J/mol; recalled from
#: memory). pycalphad reads these fields but computes nothing from them (only the masses enter W and PPM).
GAS_ELEMENT_DATA = {"H": _gas_element("H", "H2", 1.008, 8468.0), "N": _gas_element("N", "N2", 14.007, 8670.0),
                    "O": _gas_element("O", "O2", 15.999, 8683.0)}


def _element_data(ldb: Any, names: list[str]) -> dict[str, tuple[str, float, float, float]]:
    """ELEMENT data of `names` from the database; H, N and O it lacks from `GAS_ELEMENT_DATA`."""
    from solubility.databases.reader import element_data

    held = {e.upper() for e in ldb.db.elements}
    missing = [n for n in names if n.upper() not in held and n.upper() in GAS_ELEMENT_DATA]
    out = element_data(ldb, [n for n in names if n not in missing])
    out.update({n: GAS_ELEMENT_DATA[n.upper()] for n in missing})
    return out


def _source_text(ldb: Any) -> str:
    if ldb.path is None:
        raise InputError(f"database {ldb.name!r} has no file; give a TDB file or a bundled name to copy from")
    return ldb.path.read_text(encoding="utf-8", errors="replace")


def _renamed(params: Mapping[str, str], old: str, new: str) -> dict[str, str]:
    return {k.replace(f"({old},", f"({new},", 1): v for k, v in params.items()}


def model_database_text(
    model: SublatticeModel,
    parameters: Mapping[str, str] | None = None,
    *,
    base: Any = None,
    source: Any = "fe-c",
    from_phase: str | None = None,
    shift_temperature: float = 1000.0,
) -> tuple[str, dict[str, Any]]:
    """TDB text pycalphad loads on its own, holding the model's phase.

    Parameters
    ----------
    model
        The interstitial phase.
    parameters
        ``{"G(PHASE,FE:C;0)": expression}`` (as `SublatticeModel.tdb_block`); they win over copied ones.
    base
        A database (path or bundled name): the text is that database with the phase added, or replacing the
        phase of the same name. None: a stand-alone file.
    source
        Database the ELEMENT data and FUNCTIONs of a stand-alone file are copied from (ignored with `base`).
    from_phase
        Phase of the base (or source) database whose parameters are copied, re-expressed for the model's site
        ratio. Default: the model's own phase when `base` has it.
    shift_temperature
        Temperature (K) at which the move of the concentrated behaviour is reported after a conversion.

    Returns
    -------
    (text, info)
        info: ``copied_from``, and after a site-ratio change ``conversion`` with ``c_old``, ``c_new`` and
        ``mu_shift_J_per_mol`` {x: change of mu_X at that mole fraction, J/mol}.
    """
    from solubility.databases.reader import check_phases, load_database

    ldb = load_database(base if base is not None else source)
    text = _source_text(ldb)
    given = normalise_parameters(model, parameters or {})
    params: dict[str, str] = {}
    info: dict[str, Any] = {"copied_from": None}
    src = from_phase.strip().upper() if from_phase else (model.phase if base is not None and
                                                          model.phase in ldb.phases else None)
    if src is not None:
        (src,) = check_phases(ldb, [src])
        ratios, _ = ldb.sublattices(src)
        if len(ratios) != 2 or abs(ratios[0] - model.a) > 1e-12 * model.a:
            raise InputError(f"phase {src} is {ratios}; only a two-sublattice phase with the model's host ratio "
                             f"a = {model.a:g} is copied")
        original = parameters_of(text, src)
        if abs(ratios[1] - model.c) <= 1e-12 * model.c:
            params = _renamed(original, src, model.phase)
        else:
            if len(model.hosts) != 1 or len(model.interstitials) != 1:
                raise InputError("a site-ratio conversion takes one host and one interstitial element")
            conv = convert_site_ratio(_renamed(original, src, model.phase), host=model.hosts[0],
                                      solute=model.interstitials[0], a=model.a, c_old=ratios[1], c_new=model.c)
            params = conv.parameters
            info["conversion"] = {
                "c_old": ratios[1], "c_new": model.c, "temperature_K": shift_temperature,
                "mu_shift_J_per_mol": {str(x): concentrated_shift(conv, shift_temperature, x)
                                       for x in SHIFT_FRACTIONS if x < model.c / (model.a + model.c)},
            }
        info["copied_from"] = src
    params.update(given)
    if base is not None:
        return extend_tdb(text, model, params, base_name=ldb.name), info
    elements = _element_data(ldb, [*model.hosts, *model.interstitials])
    return standalone_tdb(model, params, elements=elements, source_text=text, source_name=ldb.name), info
