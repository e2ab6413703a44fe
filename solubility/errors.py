"""The exception hierarchy of `solubility`.

Every error the tool raises on purpose is a `SolubilityError`. Those caused by what the user gave also subclass
the matching builtin (`ValueError`, `FileNotFoundError`, ...), so callers that catch builtins keep working.
The command line turns any `SolubilityError` into one line on standard error and exit status 2, except
`WriteError` (an output that could not be written: a full or failing device), which gives exit status 4.
"""

from __future__ import annotations

__all__ = [
    "ConvergenceError",
    "DatabaseError",
    "DatabaseNotFoundError",
    "DatabaseWarning",
    "InputError",
    "JobError",
    "OutputError",
    "SolubilityError",
    "SolubilityWarning",
    "StructureError",
    "Terminated",
    "UndefinedFunctionWarning",
    "WriteError",
]


class SolubilityError(Exception):
    """Base class of every error raised by `solubility` on purpose."""


class InputError(SolubilityError, ValueError):
    """A value given by the user is not acceptable (the message names it and what is accepted)."""


class StructureError(InputError):
    """A lattice, basis or structure file is invalid."""


class DatabaseError(SolubilityError, ValueError):
    """A thermodynamic database cannot be read, or lacks a phase, element or species asked for."""


class DatabaseNotFoundError(DatabaseError, FileNotFoundError):
    """A database path does not exist and is not the name of a bundled database."""


class JobError(InputError):
    """A sweep job (file or list of cases) is invalid; the message names the case and the key."""


class OutputError(SolubilityError, OSError):
    """An output file cannot be written (exists already, unwritable folder, full disk)."""


class WriteError(OutputError):
    """Writing an output failed part-way (full disk, file-size limit, the folder went away): a fault, not bad
    input. The old file is kept and no temporary file is left."""


class ConvergenceError(SolubilityError, RuntimeError):
    """A calculation did not converge where a result was required (points in a line are flagged instead)."""


class SolubilityWarning(UserWarning):
    """Base class of every warning issued by `solubility` (filter them with this class)."""


class DatabaseWarning(SolubilityWarning):
    """What a database leaves out or the tool had to decide about it (missing end-members, undefined functions,
    ordered descriptions pycalphad cannot build); the same lines go into the results' attrs."""


class UndefinedFunctionWarning(DatabaseWarning):
    """A database uses FUNCTIONs it never defines; pycalphad takes each as zero (the message names them)."""


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived (the command line and `solubility._io.atomic_outputs` raise it in the main thread so that
    every `finally` runs): handled as Ctrl-C, with exit status 143 instead of 130."""
