"""Field checks shared by the machine's dataclasses (private).

Each check raises :class:`~workbench.errors.MachineFileError` with a message naming the entry,
the field, the bad value and what is allowed, e.g.
``"[[bearing]] 'output NDE': contact_angle_deg = 95: must be >= 0 and < 90"``.  The machine file
reader adds the file name in front.
"""

from __future__ import annotations

from workbench import checks
from workbench.checks import FieldError, describe, positive_int, real, text
from workbench.errors import MachineFileError, where


def _error(label: str, field: str, value: object, allowed: str, cls=MachineFileError):
    return cls(f"{where(None, label)}: {describe(field, value, allowed)}")


def _check_int(
    label: str, field: str, value: object, minimum: int, *, maximum: int | None = None,
    cls=MachineFileError,
) -> int:
    try:
        return positive_int(None, field, value, low=minimum, high=maximum, whole_float=False)
    except FieldError as exc:
        raise cls(f"{where(None, label)}: {exc}") from None


def _check_real(
    label: str, field: str, value: object, *, positive: bool = False, cls=MachineFileError
) -> float:
    try:
        return checks.positive(None, field, value) if positive else real(None, field, value)
    except FieldError as exc:
        raise cls(f"{where(None, label)}: {exc}") from None


def _check_name(label: str, field: str, value: object, *, cls=MachineFileError) -> str:
    try:
        return text(None, field, value)
    except FieldError as exc:
        raise cls(f"{where(None, label)}: {exc}") from None


def _set(obj, name: str, value) -> None:
    object.__setattr__(obj, name, value)
