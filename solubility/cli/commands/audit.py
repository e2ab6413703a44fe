"""Audit the site ratios of the interstitial phases of a database against the site geometry.

For every phase with an interstitial sublattice (one holding VA and interstitial species), the lattice is read
from the Strukturbericht tag of its name (A1 fcc, A2 bcc, A3 hcp, A4 diamond; B2 and L12 as their parent
lattice) or given with --structure; the site ratio c/a is compared with the counts of the lattice's site
families: "consistent" (c/a = n), "consistent with blocking" (c/a < n; blocking b = 1 - (c/a)/n), "no
geometric match" or "lattice unknown". DATABASE is a TDB file or a bundled name (see 'solubility databases').
"""

from __future__ import annotations

import argparse

from solubility.cli.commands._common import emit_json


def _mapping(text: str) -> tuple[str, str]:
    phase, sep, lattice = text.partition("=")
    if not sep or not phase.strip() or not lattice.strip():
        raise argparse.ArgumentTypeError(f"{text!r} is not PHASE=LATTICE (e.g. ETA_CARB=hcp)")
    return phase.strip(), lattice.strip()


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``solubility audit``."""
    parser.add_argument("database", metavar="DATABASE", help="TDB file or bundled database name")
    parser.add_argument(
        "--structure",
        action="append",
        type=_mapping,
        default=[],
        metavar="PHASE=LATTICE",
        help="take PHASE to be on LATTICE (fcc, bcc, hcp, sc, diamond); repeatable",
    )
    parser.add_argument("--json", action="store_true", help='print one JSON object: {"phases": [...]}')


def _fmt(value: float | None) -> str:
    return "-" if value is None else f"{value:g}"


def _table(rows: list, name: str) -> str:
    head = ("phase", "sublattices", "lattice", "sites", "n", "b", "verdict")
    body = []
    for r in rows:
        subl = " ".join(
            f"({','.join(s)}){_fmt(x)}" for s, x in zip(r.constituents, r.site_ratios, strict=True)
        )
        body.append(
            (
                r.name,
                subl,
                r.structure or "?",
                r.site_kind or "-",
                _fmt(r.sites_per_host_atom),
                _fmt(r.blocking),
                r.verdict,
            )
        )
    widths = [max(len(str(x)) for x in col) for col in zip(head, *body, strict=True)]
    lines = [f"site-ratio audit of {name}: {len(rows)} interstitial phase(s)"]
    for row in (head, *body):
        lines.append("  ".join(str(x).ljust(w) for x, w in zip(row, widths, strict=True)).rstrip())
    lines += ["", *(f"{r.name}: {r.note}" for r in rows)]
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    """Audit the database and print a table or JSON."""
    from solubility.databases.audit import audit_database
    from solubility.databases.reader import load_database

    ldb = load_database(args.database)
    rows = audit_database(ldb, structure_map=dict(args.structure))
    if args.json:
        emit_json({"database": ldb.name, "sha256": ldb.sha256, "phases": [r.to_dict() for r in rows]})
    else:
        print(_table(rows, ldb.name))
    return 0
