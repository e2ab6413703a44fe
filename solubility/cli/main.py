"""The `solubility` command: a thin shell over the library.

Each subcommand is a small module in `solubility.commands` with a help docstring, ``add_arguments(parser)`` and
``run(args) -> int``. Modules import their heavy dependencies inside ``run``, so ``--help`` stays instant and the
geometry commands never import pycalphad. Any `SolubilityError` becomes one line on standard error and exit
status 2 (``--traceback`` shows the full traceback instead).

Exit statuses: 0 done; 1 ``sweep``: some cases failed; 2 bad input (one line on standard error); 3 the command
ran but its result holds no number (``solvus``: no point of the line has one; nothing is drawn); 4 an output could
not be written (standard output or a file on a full or failing device; the old file is kept); 130 interrupted by
Ctrl-C (SIGINT), 143 by SIGTERM (either way one line says which outputs, if any, were written whole; no
temporary file is left).

Warnings (the tool's own, pycalphad's, numpy's) are printed as one line each, ``warning: MESSAGE``, on
standard error, without the source line Python's warnings module would add.

A value that starts with a minus sign is taken as the value of the option before it (``--temperatures
-10:100:10``), and a console that cannot show a character (an ASCII terminal and the Å of ``sites``) gets an
ASCII spelling instead of an encoding error.
"""

from __future__ import annotations

import argparse
import codecs
import contextlib
import errno
import importlib
import os
import re
import signal
import sys
import threading
import warnings
from collections.abc import Iterator, Sequence

from solubility import __version__
from solubility.errors import SolubilityError, Terminated, WriteError

#: subcommands in the order ``--help`` lists them
COMMANDS = ("sites", "model", "databases", "audit", "solvus", "uptake", "fit", "sweep")

EXIT_OK = 0
EXIT_USAGE = 2
EXIT_EMPTY = 3
EXIT_OUTPUT = 4
EXIT_INTERRUPTED = 130
EXIT_TERMINATED = 143
#: errno values of a device that cannot take more output
_WRITE_ERRORS = {errno.ENOSPC, errno.EIO, errno.EFBIG, getattr(errno, "EDQUOT", errno.ENOSPC)}

#: ASCII spellings of the non-ASCII characters the commands print
_ASCII = {"Å": "A", "°": "deg", "→": "->", "²": "^2", "³": "^3", "×": "x", "−": "-", "≤": "<=", "≥": ">=",
          "ε": "eps", "μ": "mu", "±": "+-"}
_NEGATIVE = re.compile(r"^-\.?\d")


def _ascii_spelling(exc: UnicodeEncodeError) -> tuple[str, int]:
    text = exc.object[exc.start:exc.end]
    return "".join(_ASCII.get(ch, "?") for ch in text), exc.end


codecs.register_error("solubility_ascii", _ascii_spelling)


def _plain_streams() -> None:
    """Streams whose encoding cannot show every character write an ASCII spelling instead of failing."""
    for stream in (sys.stdout, sys.stderr):
        encoding = (getattr(stream, "encoding", None) or "").lower().replace("-", "")
        if encoding and not encoding.startswith(("utf", "cp65001")) and hasattr(stream, "reconfigure"):
            with contextlib.suppress(ValueError, OSError):  # a detached or closed stream stays as it is
                stream.reconfigure(errors="solubility_ascii")


class _UsageError(Exception):
    """Raised by the parser instead of printing usage and exiting."""


class _Parser(argparse.ArgumentParser):
    """An ArgumentParser whose errors are one line and never call `sys.exit` from deep inside."""

    def error(self, message: str) -> None:  # type: ignore[override]
        hint = f"see '{self.prog} --help'"
        if "expected one argument" in message:
            option = message.split(":")[0].replace("argument", "").strip().split("/")[0]
            hint = f"give the value after '=' if it starts with '-', e.g. {option}=-10:100:10; " + hint
        elif message.startswith("unrecognized arguments"):
            hint = "an option takes one value: --exclude A,B or --exclude A --exclude B; " + hint
        raise _UsageError(f"{self.prog}: {message} ({hint})")


def _join_negative_values(parser: argparse.ArgumentParser, args: list[str]) -> list[str]:
    """``--opt -10:100:10`` -> ``--opt=-10:100:10`` for options that take one value (argparse would read the
    value as an option)."""
    takes_value = set()
    for action in parser._actions:  # the subcommands' options too
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                takes_value |= {o for a in sub._actions if a.nargs is None and a.option_strings
                                for o in a.option_strings}
    out: list[str] = []
    i = 0
    while i < len(args):
        if args[i] in takes_value and i + 1 < len(args) and _NEGATIVE.match(args[i + 1]):
            out.append(f"{args[i]}={args[i + 1]}")
            i += 2
        else:
            out.append(args[i])
            i += 1
    return out


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
    _plain_streams()
    args_list = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(_join_negative_values(parser, args_list))
    except _UsageError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_USAGE
    try:
        with _command_context():
            from solubility.results._mplconfig import ensure_config_dir

            ensure_config_dir()  # before pycalphad imports matplotlib
            status = int(args._run(args) or 0)
            sys.stdout.flush()  # a full device fails here, not in the interpreter's exit
        return status
    except WriteError as exc:  # a fault (full disk), not bad input
        if getattr(args, "traceback", False):
            raise
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_OUTPUT
    except SolubilityError as exc:
        if getattr(args, "traceback", False):
            raise
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt as exc:
        return _interrupted(exc)
    except BrokenPipeError:
        _silence_stdout()
        return EXIT_OK
    except OSError as exc:
        if getattr(args, "traceback", False) or exc.errno not in _WRITE_ERRORS:
            raise
        if getattr(exc, "_solubility_stdout", False):
            _silence_stdout()
            print(f"error: cannot write to standard output: {exc.strerror or exc}", file=sys.stderr)
        else:  # a file written on the way (a cache, a temporary database) on a full or failing device
            where = f" {exc.filename!r}" if exc.filename else " a file"
            print(f"error: could not write{where}: {exc.strerror or exc}; free some space and run again",
                  file=sys.stderr)
        return EXIT_OUTPUT


def _interrupted(exc: KeyboardInterrupt) -> int:
    """One line for Ctrl-C or SIGTERM saying which outputs were written whole (the rest were not touched)."""
    from solubility._io import written_outputs

    how = "SIGTERM" if isinstance(exc, Terminated) else "Ctrl-C"
    count, last = written_outputs()
    count -= _STATE["written_before"]
    if count <= 0:
        note = "no output file was written or changed and no temporary file is left"
    else:
        names = ", ".join(str(p) for p in last[-count:])
        note = (f"{count} output file{'s' if count > 1 else ''} had been written whole ({names}); "
                "no temporary file is left")
    print(f"error: interrupted by {how}; {note}", file=sys.stderr)
    return EXIT_TERMINATED if isinstance(exc, Terminated) else EXIT_INTERRUPTED


_STATE = {"written_before": 0}


def _terminated(signum: int, frame) -> None:
    raise Terminated("terminated (SIGTERM)")


def _one_line_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """`warnings.showwarning` of the command line: ``warning: MESSAGE`` on one line, no source line."""
    text = " ".join(str(message).split())
    if not issubclass(category, UserWarning) or category is UserWarning:
        origin = re.search(r"[/\\](?:site|dist)-packages[/\\]([A-Za-z_][\w]*)", filename or "")
        text += f" ({category.__name__}{' in ' + origin.group(1) if origin else ''})"
    with contextlib.suppress(OSError, ValueError):  # standard error is gone: nothing more to do
        print(f"warning: {text}", file=sys.stderr if file is None else file)


class _Stdout:
    """Standard output, marking the OSErrors it raises so that they are told from those of other files."""

    def __init__(self, stream) -> None:
        self._stream = stream

    def write(self, text: str) -> int:
        try:
            return self._stream.write(text)
        except OSError as exc:
            exc._solubility_stdout = True  # type: ignore[attr-defined]
            raise

    def flush(self) -> None:
        try:
            self._stream.flush()
        except OSError as exc:
            exc._solubility_stdout = True  # type: ignore[attr-defined]
            raise

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


@contextlib.contextmanager
def _command_context() -> Iterator[None]:
    """While a command runs: SIGTERM raises `Terminated` (every ``finally`` runs: temporaries are removed),
    warnings are one line each, and standard output marks its own write errors."""
    from solubility._io import written_outputs

    _STATE["written_before"] = written_outputs()[0]
    main_thread = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGTERM, _terminated) if main_thread else None
    show, stdout = warnings.showwarning, sys.stdout
    warnings.showwarning = _one_line_warning
    sys.stdout = _Stdout(stdout)
    try:
        yield
    finally:
        if sys.stdout.__class__ is _Stdout:
            sys.stdout = stdout
        warnings.showwarning = show
        if main_thread:
            signal.signal(signal.SIGTERM, previous if previous is not None else signal.SIG_DFL)


def _silence_stdout() -> None:
    """Point standard output at the null device so the interpreter's final flush cannot fail again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):  # pragma: no cover - stdout is not a file descriptor (tests)
        pass


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
