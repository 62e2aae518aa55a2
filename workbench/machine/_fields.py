"""Field checks shared by the machine's dataclasses (private).

Each check raises :class:`~workbench.errors.MachineFileError` with a message naming the entry,
the field, the bad value and what is allowed, e.g.
``"[[bearing]] 'output NDE': contact_angle_deg = 95: must be >= 0 and < 90"``.  The machine file
reader adds the file name in front.
"""

from __future__ import annotations

import difflib
import math
import numbers
from collections.abc import Mapping

from workbench.errors import MachineFileError, where


def _fmt(value: object) -> str:
    """Show a value the way it is written in a machine file (TOML)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return repr(value) if not isinstance(value, numbers.Number) else str(value)


def _kind_of(value: object) -> str:
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, str):
        return "a string"
    if isinstance(value, numbers.Integral):
        return "an integer"
    if isinstance(value, numbers.Real):
        return "a number"
    if isinstance(value, (list, tuple)):
        return "an array"
    if isinstance(value, Mapping):
        return "a table"
    return type(value).__name__


def _error(label: str, field: str, value: object, allowed: str, cls=MachineFileError):
    return cls(f"{where(None, label, f'{field} = {_fmt(value)}')}: {allowed}")


def _check_int(
    label: str, field: str, value: object, minimum: int, *, maximum: int | None = None,
    cls=MachineFileError,
) -> int:
    word = "a positive integer" if minimum == 1 else f"an integer >= {minimum}"
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise _error(label, field, value, f"must be {word} (got {_kind_of(value)})", cls=cls)
    if value < minimum:
        raise _error(label, field, value, f"must be {word}", cls=cls)
    if maximum is not None and value > maximum:
        raise _error(label, field, value, f"must be an integer from {minimum} to {maximum}",
                     cls=cls)
    return int(value)


def _check_real(
    label: str, field: str, value: object, *, positive: bool = False, cls=MachineFileError
) -> float:
    word = "a positive number" if positive else "a finite number"
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise _error(label, field, value, f"must be {word} (got {_kind_of(value)})", cls=cls)
    number = float(value)
    if not math.isfinite(number):
        raise _error(label, field, value, f"must be {word} (not inf or nan)", cls=cls)
    if positive and number <= 0:
        raise _error(label, field, value, f"must be {word} (> 0)", cls=cls)
    return number


def _check_name(label: str, field: str, value: object, *, cls=MachineFileError) -> str:
    allowed = (
        "must be a non-empty string of printable characters without leading or trailing spaces"
    )
    if not isinstance(value, str):
        raise _error(label, field, value, f"{allowed} (got {_kind_of(value)})", cls=cls)
    if not value or value != value.strip() or not value.isprintable():
        raise _error(label, field, value, allowed, cls=cls)
    return value


def _suggest(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f"; did you mean {_fmt(close[0])}?" if close else ""


def _set(obj, name: str, value) -> None:
    object.__setattr__(obj, name, value)
