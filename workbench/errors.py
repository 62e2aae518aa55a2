"""One error hierarchy for foldline.

Every error foldline raises on purpose derives from :class:`FoldlineError`.  Each subclass also
derives from the built-in exception a Python user would expect (``ValueError`` for bad values,
``OSError`` for files), in the manner of pint's error classes, so ``except ValueError`` keeps
working.  Messages name the file, the entry, the field, the bad value and what is allowed.
"""

from __future__ import annotations

__all__ = [
    "FoldlineError",
    "FoldlineWarning",
    "InputError",
    "MachineFileError",
    "TrainError",
    "PlanFileError",
    "RunFileError",
    "TachoError",
    "OutputExistsError",
    "where",
]


class FoldlineError(Exception):
    """Base class of every error foldline raises on purpose."""


class FoldlineWarning(UserWarning):
    """A value was adjusted or a result is less certain than usual; the message says which."""


class InputError(FoldlineError, ValueError):
    """A bad argument value (a rate that is not positive, an empty array, ...)."""


class MachineFileError(FoldlineError, ValueError):
    """A machine file (or machine dictionary) that cannot be read or is not valid."""


class TrainError(MachineFileError):
    """The drive train does not connect, or connects inconsistently."""


class PlanFileError(FoldlineError, ValueError):
    """A plan file (or plan dictionary) that cannot be read or is not valid."""


class RunFileError(FoldlineError, OSError):
    """A run file or its sidecar that cannot be read, or holds data that cannot be used."""


class TachoError(FoldlineError, ValueError):
    """A tacho signal from which no trustworthy speed can be found."""


class OutputExistsError(FoldlineError, FileExistsError):
    """An output file exists already and overwriting was not asked for."""


def where(source: str | None, entry: str | None = None, field: str | None = None) -> str:
    """Format the location prefix of an error message: ``"file.toml: [[bearing]] 'NDE': field"``.

    Parameters
    ----------
    source : str or None
        File name (or ``"<dict>"``) the value came from.
    entry : str or None
        Table and entry name, e.g. ``"[[bearing]] 'output NDE'"``.
    field : str or None
        Key inside the entry.
    """
    parts = [p for p in (source, entry, field) if p]
    return ": ".join(parts)
