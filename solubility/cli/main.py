"""The `solubility` command: a thin shell over the library.

Each subcommand is a small module in `solubility.commands` with a help docstring, ``add_arguments(parser)`` and
``run(args) -> int``. Modules import their heavy dependencies inside ``run``, so ``--help`` stays instant and the
geometry commands never import pycalphad. Any `SolubilityError` becomes one line on standard error and exit
status 2 (``--traceback`` shows the full traceback instead).
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from solubility import __version__
from solubility.errors import SolubilityError

#: subcommands in the order ``--help`` lists them
COMMANDS = ("sites", "model", "databases", "audit", "solvus", "uptake", "fit", "sweep")

EXIT_OK = 0
EXIT_USAGE = 2


class _UsageError(Exception):
    """Raised by the parser instead of printing usage and exiting."""


class _Parser(argparse.ArgumentParser):
    """An ArgumentParser whose errors are one line and never call `sys.exit` from deep inside."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise _UsageError(f"{self.prog}: {message} (see '{self.prog} --help')")


def build_parser() -> argparse.ArgumentParser:
    """The full argument parser (subcommand modules are imported, their heavy dependencies are not)."""
    parser = _Parser(
        prog="solubility",
        description="Interstitial sites, sublattice models and exact solvus lines from open CALPHAD databases.",
        epilog="Run 'solubility COMMAND --help' for the options of a command.",
    )
    parser.add_argument("--version", action="version", version=f"solubility {__version__}")
    parser.add_argument(
        "--traceback", action="store_true", help="show the full traceback of an error instead of one line"
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS:
        module = importlib.import_module(f"solubility.cli.commands.{name}")
        doc = (module.__doc__ or "").strip()
        summary = doc.splitlines()[0] if doc else name
        cmd = sub.add_parser(
            name, help=summary, description=doc, formatter_class=argparse.RawDescriptionHelpFormatter
        )
        cmd.add_argument("--traceback", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
        module.add_arguments(cmd)
        cmd.set_defaults(_run=module.run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line with `argv` (default: ``sys.argv[1:]``) and return the exit status."""
    args_list = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(args_list)
    except _UsageError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_USAGE
    try:
        return int(args._run(args) or 0)
    except SolubilityError as exc:
        if getattr(args, "traceback", False):
            raise
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
