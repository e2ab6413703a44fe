"""List the open databases bundled with the tool.

Each entry gives the name to pass as DATABASE to other commands, the file, its sha256, the citation and the
licence. Any TDB file can be given by its path instead.
"""

from __future__ import annotations

import argparse

from solubility.cli.commands._common import emit_json


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``solubility databases``."""
    parser.add_argument("--json", action="store_true", help='print one JSON object: {"databases": [...]}')


def run(args: argparse.Namespace) -> int:
    """List the bundled databases."""
    from solubility.databases.bundled import bundled_databases

    entries = bundled_databases()
    if args.json:
        emit_json({"databases": entries})
        return 0
    for e in entries:
        print(f"{e['name']}  ({e['file']}, sha256 {e['sha256'][:16]}...)")
        print(f"    {e['description']}")
        print(f"    cite: {e['citation']}")
        print(f"    licence: {e['licence']}")
    return 0
