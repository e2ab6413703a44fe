"""Write the TDB phase block of a two-sublattice interstitial model (host)a(X,VA)c from the site geometry.

The site ratio c = a n (1 - b) comes from the count n of sites per host atom of the chosen site family and the
blocking fraction b. Defaults: the phase name of the lattice (fcc FCC_A1, bcc BCC_A2, hcp HCP_A3, diamond
DIAMOND_A4, sc SC_AH) and the site family C and N usually take (octahedral in fcc, bcc and hcp, tetrahedral in
diamond, cubic in sc). Common practice: hcp is written with --blocking 0.5, giving HCP_A3 1:0.5.
End-members not given with --parameter get zero placeholders, marked in a comment. TC and BMAGN parameters add
the magnetic type definition of the lattice (bcc -1, 0.40; fcc and hcp -3, 0.28).

--output FILE writes a database pycalphad loads on its own: ELEMENT lines and every FUNCTION the parameters use,
copied from --with-elements DATABASE (default the bundled fe-c). --base DATABASE writes that database with the
phase added, or replacing the phase of the same name. --from-phase PHASE copies the parameters of a phase of that
database; when its site ratio differs from the model's, they are re-expressed exactly so that the dilute
solubility stays the same (how far the concentrated behaviour moves is reported in the file and with --json).
"""

from __future__ import annotations

import argparse
from pathlib import Path

from solubility.cli.commands._common import emit_json, finite_float

_STRUCTURES = ("fcc", "bcc", "hcp", "sc", "diamond")


def _parameter(text: str) -> tuple[str, str]:
    key, sep, expr = text.partition("=")
    if not sep or not key.strip() or not expr.strip():
        raise argparse.ArgumentTypeError(f"{text!r} is not 'G(PHASE,HOST:SOLUTE;0)=EXPRESSION'")
    return key.strip(), expr.strip()


def _elements(values: list[str]) -> tuple[str, ...]:
    return tuple(e.strip() for v in values for e in v.split(",") if e.strip())


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``solubility model``."""
    parser.add_argument(
        "structure",
        metavar="STRUCTURE",
        help=f"lattice ({', '.join(_STRUCTURES)}) or a structure file (then give --phase and --site)",
    )
    parser.add_argument(
        "--host",
        action="append",
        required=True,
        metavar="EL",
        help="host element (repeat or separate with commas for several)",
    )
    parser.add_argument(
        "--solute",
        action="append",
        required=True,
        metavar="EL",
        help="interstitial element (repeat or separate with commas for several)",
    )
    parser.add_argument("--site", metavar="KIND", help="site family kind (octahedral, tetrahedral, ...)")
    parser.add_argument(
        "--blocking",
        type=finite_float,
        default=0.0,
        metavar="B",
        help="blocked fraction of the sites, 0 <= B < 1 (default 0)",
    )
    parser.add_argument("--phase", metavar="NAME", help="phase name (default from the lattice)")
    parser.add_argument(
        "--c-over-a", type=finite_float, metavar="F", help="axial ratio of hcp (default ideal)"
    )
    parser.add_argument(
        "--parameter",
        action="append",
        type=_parameter,
        default=[],
        metavar="'G(PHASE,FE:C;0)=EXPR'",
        help="an end-member or interaction expression, J per mole of formula units; repeatable",
    )
    parser.add_argument(
        "--with-elements",
        nargs="?",
        const="fe-c",
        metavar="DATABASE",
        help="also write ELEMENT lines, copied from DATABASE (default: the bundled fe-c)",
    )
    parser.add_argument(
        "--base", metavar="DATABASE", help="write DATABASE with the phase added or replaced (a path or bundled name)"
    )
    parser.add_argument(
        "--from-phase",
        metavar="PHASE",
        help="copy the parameters of PHASE of the base (or --with-elements) database, converted to the site ratio "
        "(default with --base: the model's own phase, when the base has it)",
    )
    parser.add_argument(
        "--output", metavar="FILE", help="write a complete database to FILE (loads in pycalphad on its own)"
    )
    parser.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    parser.add_argument(
        "--json", action="store_true", help='print one JSON object: {"model": ..., "tdb": ...}'
    )


def run(args: argparse.Namespace) -> int:
    """Build the model and print or write its TDB block."""
    from solubility._io import atomic_write_text, check_output_path
    from solubility.errors import InputError
    from solubility.models.sublattice import SublatticeModel

    structure = args.structure.strip()
    if structure.lower() not in _STRUCTURES and not Path(structure).is_file():
        raise InputError(
            f"structure {args.structure!r} is neither a built-in lattice ({', '.join(_STRUCTURES)}) "
            "nor a structure file"
        )
    out = None
    if args.output:
        from solubility.databases.reader import database_path

        inputs = [structure, *(database_path(d) for d in (args.with_elements, args.base) if d)]
        out = check_output_path(args.output, overwrite=args.overwrite, inputs=inputs)
    model = SublatticeModel.from_structure(
        args.phase,
        _elements(args.host),
        _elements(args.solute),
        structure,
        args.site,
        blocking=args.blocking,
        c_over_a=args.c_over_a,
    )
    info: dict = {}
    if args.base or args.from_phase or out is not None:
        from solubility.calc.model_file import model_database_text

        text, info = model_database_text(model, dict(args.parameter), base=args.base,
                                         source=args.with_elements or "fe-c", from_phase=args.from_phase)
    else:
        elements = None
        if args.with_elements:
            from solubility.databases.reader import element_data, load_database

            elements = element_data(load_database(args.with_elements), [*model.hosts, *model.interstitials])
        text = model.tdb_block(dict(args.parameter), elements=elements)
    if out is not None:
        atomic_write_text(out, text)
    if args.json:
        emit_json({"model": model.to_dict(), "tdb": text, "output": None if out is None else str(out), **info})
    elif out is None:
        print(text, end="")
    return 0
