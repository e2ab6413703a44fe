"""TDB text of a `SublatticeModel`: its phase block, a stand-alone database file, a database extended by the model.

A stand-alone file (`standalone_tdb`) holds ELEMENT lines (reference state, mass, H298-H0, S298), every FUNCTION
the parameters need (copied, with the functions those use, from a source database's text) and the phase block;
pycalphad loads it on its own. When TC or BMAGN parameters are given, the phase gets the magnetic type definition
of its lattice (`solubility.constants.MAGNETIC_CONSTANTS`), without which pycalphad ignores them. `extend_tdb`
writes a base database's text with the phase added, or replacing the phase of the same name. Pure text: no
pycalphad.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import TYPE_CHECKING

from solubility.constants import MAGNETIC_CONSTANTS
from solubility.errors import DatabaseError, InputError
from solubility.models.tdb_commands import function_closure, functions_of, referenced_names, tdb_commands
from solubility.models.tdb_text import check_expression, split_ranges

if TYPE_CHECKING:  # pragma: no cover
    from solubility.models.sublattice import SublatticeModel

__all__ = [
    "extend_tdb", "magnetic_constants", "normalise_parameters", "phase_block", "standalone_tdb", "with_parameter",
]

ElementData = Mapping[str, tuple[str, float, float, float]]

_PARAM_KEY_RE = re.compile(r"^\s*([A-Z]+)\s*\(\s*([A-Z0-9_#]+)\s*,\s*([^;)]+?)\s*(?:;\s*([0-9]+)\s*)?\)\s*$")
_MAGNETIC_TYPES = ("TC", "BMAGN")
#: type-definition characters tried for a new phase, in order (pycalphad accepts any printable character)
_TYPECHARS = "&'()*+-/<=>?@[]^{|}~"


def _num(value: float) -> str:
    """A short exact-enough decimal for TDB text (``3``, ``0.5``, ``1.33333333333``)."""
    return f"{value:.12g}"


def _range(expr: str) -> str:
    text = expr.strip()
    return text if ";" in text else f"298.15 {text}; 6000 N"


def normalise_parameters(model: SublatticeModel, parameters: Mapping[str, str]) -> dict[str, str]:
    """``{"G(PHASE,FE:C;0)": expression}`` checked against the model and the expression guards, keys normalised.

    Raises
    ------
    InputError
        A key that names another phase, an unknown species or a wrong sublattice count; an empty expression, or
        one that breaks the guards (`solubility.models.tdb_text.check_expression`).
    """
    out: dict[str, str] = {}
    subl = model.constituents
    for raw_key, expr in parameters.items():
        key = str(raw_key).strip().upper()
        m = _PARAM_KEY_RE.match(key)
        if not m:
            raise InputError(f"parameter {raw_key!r} is not of the form G({model.phase},FE:C;0)")
        ptype, phase, array, order = m.group(1), m.group(2), m.group(3), m.group(4) or "0"
        if phase != model.phase:
            raise InputError(f"parameter {raw_key!r} names phase {phase!r}; this model's phase is {model.phase!r}")
        parts = [p.strip() for p in array.split(":")]
        if len(parts) != 2:
            raise InputError(f"parameter {raw_key!r} has {len(parts)} sublattices; this model has 2 (host:site)")
        species = []
        for i, part in enumerate(parts):
            names = [s.strip() for s in part.split(",")]
            bad = [s for s in names if s not in subl[i]]
            if bad or not all(names):
                raise InputError(
                    f"parameter {raw_key!r}: {bad or names} not on sublattice {i + 1}; it holds {list(subl[i])}"
                )
            species.append(",".join(names))
        text = str(expr).strip()
        if not text:
            raise InputError(f"parameter {raw_key!r} has an empty expression")
        _check_range_text(text, raw_key)
        out[f"{ptype}({phase},{':'.join(species)};{int(order)})"] = text
    return out


def _check_range_text(text: str, key: str) -> None:
    """Run the expression guards on every expression of a parameter value (raises InputError)."""
    for e in [text] if ";" not in text else split_ranges(text):
        try:
            check_expression(e)
        except DatabaseError as exc:
            raise InputError(f"parameter {key!r}: {exc}") from None
    if "!" in text or "$" in text:
        raise InputError(f"parameter {key!r}: the expression may not contain '!' or '$'")


def magnetic_constants(model: SublatticeModel) -> tuple[float, float]:
    """(antiferromagnetic factor, structure factor) of the model's lattice, from its structure or phase name.

    Raises
    ------
    InputError
        Neither the structure nor the phase name says bcc, fcc or hcp.
    """
    lattice = (model.structure or "").lower()
    if lattice not in MAGNETIC_CONSTANTS:
        lattice = next((k for k in MAGNETIC_CONSTANTS if model.phase.startswith(k.upper())), "")
    if not lattice:
        raise InputError(
            f"TC or BMAGN given for {model.phase}, whose lattice is not bcc, fcc or hcp; the magnetic constants "
            "are known for those only (build the model on a lattice, or name the phase BCC_..., FCC_..., HCP_...)"
        )
    return MAGNETIC_CONSTANTS[lattice]


def _element_lines(model: SublatticeModel, elements: ElementData) -> list[str]:
    lines = [" ELEMENT VA   VACUUM   0.0 0.0 0.0 !"]
    for el in (*model.hosts, *model.interstitials):
        try:
            ref, mass, h298, s298 = elements[el]
        except KeyError:
            raise InputError(f"no reference data for element {el!r}; give it among the ELEMENT data") from None
        lines.append(f" ELEMENT {el:<3} {ref}  {float(mass)!r} {float(h298)!r} {float(s298)!r} !")
    return [*lines, ""]


def _header_lines(model: SublatticeModel) -> list[str]:
    n = "unknown" if model.sites_per_host_atom is None else _num(model.sites_per_host_atom)
    kind = model.site_kind or "unknown"
    where = f" of {model.structure}" if model.structure else ""
    return [
        f"$ {model.phase}: ({','.join(model.hosts)}){_num(model.a)} "
        f"({','.join(model.constituents[1])}){_num(model.c)}, written by solubility",
        f"$ interstitial sites: {kind}{where}, n = {n} per host atom, blocking b = {_num(model.blocking)},"
        f" c = a n (1 - b) = {_num(model.c)}",
        "$ Gibbs energies in J per mole of formula units",
    ]


def phase_block(
    model: SublatticeModel,
    parameters: Mapping[str, str] | None = None,
    *,
    elements: ElementData | None = None,
    typechars: str = "%&",
) -> str:
    """The TDB text of the phase: a comment header, TYPE_DEFINITION, PHASE, CONSTITUENT and PARAMETER lines.

    Parameters
    ----------
    parameters
        ``{"G(PHASE,FE:C;0)": expression}``: TDB expressions (J per mole of formula units, functions with a
        trailing ``#``) for end-members, interactions, TC (K) or BMAGN (Bohr magnetons) of this phase. An
        expression without ``;`` is valid from 298.15 K to 6000 K; one with ``;`` is written as given and must be
        a full TDB range (``298.15 expr; 6000 N``). Every G end-member not given gets a zero placeholder, marked
        in a comment. TC or BMAGN add the magnetic type definition of the lattice (`magnetic_constants`).
    elements
        ``{element: (reference phase, mass g/mol, H298-H0 J/mol, S298 J/(mol K))}``: when given, ELEMENT lines
        for VA and every element of the model are written first.
    typechars
        Two type-definition characters: the sequential one and the one for the magnetic definition.

    Raises
    ------
    InputError
        A parameter names another phase, an unknown species or sublattice count, or its expression fails the
        guards; TC or BMAGN on a lattice without known magnetic constants.
    """
    given = normalise_parameters(model, parameters or {})
    lines = _header_lines(model)
    if elements is not None:
        lines += _element_lines(model, elements)
    seq, mag = typechars[0], typechars[1]
    magnetic = any(k.split("(", 1)[0] in _MAGNETIC_TYPES for k in given)
    lines.append(f" TYPE_DEFINITION {seq} SEQ * !")
    chars = seq
    if magnetic:
        afm, p = magnetic_constants(model)
        lines.append(f" TYPE_DEFINITION {mag} GES A_P_D {model.phase} MAGNETIC {afm!r} {p!r} !")
        chars += mag
    lines += [
        f" PHASE {model.phase} {chars} 2 {_num(model.a)} {_num(model.c)} !",
        f" CONSTITUENT {model.phase} :{','.join(model.hosts)}:{','.join(model.constituents[1])}: !",
        "",
    ]
    placeholders = [k for em in model.end_members() if (k := f"G({model.phase},{em};0)") not in given]
    lines += [f" PARAMETER {key} {_range(expr)} !" for key, expr in given.items()]
    if placeholders:
        lines.append("$ PLACEHOLDER: the end-members below were not given; their Gibbs energy is set to zero.")
        lines.append("$ Replace each by an assessed expression before computing anything with this phase.")
        lines += [f" PARAMETER {key} 298.15 0; 6000 N !" for key in placeholders]
    return "\n".join(lines) + "\n"


def _needed_functions(given: Mapping[str, str], functions: Mapping[str, str]) -> list[str]:
    names: set[str] = set()
    for text in given.values():
        for expr in [text] if ";" not in text else split_ranges(text):
            names |= referenced_names(expr)
    try:
        return function_closure(names, dict(functions))
    except DatabaseError as exc:
        raise InputError(f"{exc}; define it in the source database or write the expression out") from None


def standalone_tdb(
    model: SublatticeModel,
    parameters: Mapping[str, str] | None,
    *,
    elements: ElementData,
    source_text: str,
    source_name: str = "the source database",
) -> str:
    """A TDB file pycalphad loads on its own: ELEMENT lines, the FUNCTIONs the parameters need, the phase.

    Parameters
    ----------
    elements
        Reference data of the model's elements (as in `phase_block`).
    source_text
        TDB text the FUNCTIONs are copied from (every FUNCTION the parameters name, and those they name).

    Raises
    ------
    InputError
        A parameter names a symbol that is neither a FUNCTION of `source_text` nor T, P or R.
    """
    given = normalise_parameters(model, parameters or {})
    needed = _needed_functions(given, functions_of(source_text))
    funcs = functions_of(source_text)
    lines = [f"$ FUNCTIONs copied from {source_name}"] if needed else []
    lines += [f" FUNCTION {name} {funcs[name]} !" for name in needed]
    block = phase_block(model, given, elements=elements)
    head, _, rest = block.partition(" TYPE_DEFINITION")
    return head + "\n".join(lines) + ("\n\n" if lines else "") + " TYPE_DEFINITION" + rest


def extend_tdb(base_text: str, model: SublatticeModel, parameters: Mapping[str, str] | None, *,
               base_name: str = "the base database") -> str:
    """The text of a base database with the model's phase added, or replacing the phase of the same name.

    The replaced phase's PHASE, CONSTITUENT and PARAMETER commands, and type definitions no other phase uses,
    are removed line by line; everything else (comments, citations) is kept as it is.

    Raises
    ------
    InputError
        A parameter names a symbol the base database does not define; the phase to replace is part of an
        order-disorder description, or shares lines with other commands.
    """
    given = normalise_parameters(model, parameters or {})
    _needed_functions(given, functions_of(base_text))
    commands = tdb_commands(base_text)
    drop: set[int] = set()
    used: dict[str, set[str]] = {}
    for cmd in commands:
        words = cmd.text.split()
        if cmd.keyword == "PHASE" and len(words) > 2:
            name = words[1].split(":")[0]
            for ch in words[2]:
                used.setdefault(ch, set()).add(name)
    for cmd in commands:
        words = cmd.text.replace(",", " ").replace("(", " ").split()
        name = words[1].split(":")[0] if len(words) > 1 else ""
        if cmd.keyword == "TYPE_DEFINITION" and "DIS_PART" in cmd.text and model.phase in words:
            raise InputError(f"phase {model.phase} of {base_name} is part of an order-disorder description; "
                             "replacing it is not supported, give the model another phase name")
        hit = (cmd.keyword in ("PHASE", "CONSTITUENT") and name == model.phase) or (
            cmd.keyword == "PARAMETER" and len(words) > 2 and words[2] == model.phase)
        if cmd.keyword == "TYPE_DEFINITION" and len(words) > 1:
            hit = used.get(words[1], set()) == {model.phase}
        if hit:
            drop.update(range(cmd.first_line, cmd.last_line + 1))
    lines = base_text.split("\n")
    for cmd in commands:  # a dropped line must hold nothing of a kept command
        span = range(cmd.first_line, cmd.last_line + 1)
        if not drop.isdisjoint(span) and not drop.issuperset(span):
            raise InputError(f"{base_name}, line {cmd.first_line}: the commands of phase {model.phase} share "
                             "lines with other commands; cannot replace it line by line")
    kept = [ln for i, ln in enumerate(lines, start=1) if i not in drop]
    free = [ch for ch in _TYPECHARS if ch not in used and f"TYPE_DEFINITION {ch}" not in base_text.upper()]
    if len(free) < 2:
        raise InputError(f"{base_name} uses every type-definition character this writer knows")
    block = phase_block(model, given, typechars=free[0] + free[1])
    note = f"$ phase {model.phase} {'replaced' if drop else 'added'} by solubility"
    return "\n".join(kept).rstrip() + "\n\n" + note + "\n" + block


def with_parameter(base_text: str, key: str, expression: str) -> str:
    """A database text with one PARAMETER set to `expression` (replaced where it exists, added otherwise).

    `key` is ``TYPE(PHASE,ARRAY;ORDER)``; an expression without ``;`` is valid from 298.15 K to 6000 K.
    """
    want = key.replace(" ", "").upper()
    drop: set[int] = set()
    for cmd in tdb_commands(base_text):
        if cmd.keyword == "PARAMETER":
            words = cmd.text.split(None, 1)
            head = words[1].split(")", 1)[0].replace(" ", "") + ")" if len(words) > 1 else ""
            if not head.endswith(";0)") and ";" not in head:
                head = head[:-1] + ";0)"
            if head == want:
                drop.update(range(cmd.first_line, cmd.last_line + 1))
    kept = [ln for i, ln in enumerate(base_text.split("\n"), start=1) if i not in drop]
    return "\n".join(kept).rstrip() + f"\n\n$ parameter set by solubility\n PARAMETER {want} {_range(expression)} !\n"
