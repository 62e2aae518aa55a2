"""Validation helpers on the ground floor, shared by every layer.

Domain objects (filters, speed profiles, bands, plans) validate their own fields and raise
:class:`FieldError`, an :class:`~workbench.errors.InputError` that remembers which field was bad.
The plan reader catches it and re-raises a :class:`~workbench.errors.PlanFileError` naming the
file, the table and the key as the user wrote it.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np

from workbench.errors import FoldlineWarning, InputError


class FieldError(InputError):
    """A bad value in one named field of a domain object.

    Parameters
    ----------
    owner : str
        The object, e.g. ``"AntiAliasFilter"``.
    field : str
        The field name.
    problem : str
        What is wrong and what is allowed, e.g. ``"must be positive, got -3"``.
    """

    def __init__(self, owner: str, field: str, problem: str):
        self.owner = owner
        self.field = field
        self.problem = problem
        super().__init__(f"{owner}: {field}: {problem}")


def is_number(value) -> bool:
    """True for real numbers (int, float, numpy scalars), False for bool and everything else."""
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def show(value) -> str:
    """Short text of a bad value for an error message."""
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def real(owner: str, field: str, value, *, low=None, high=None, low_open=False,
         high_open=False) -> float:
    """Check that `value` is a finite real number inside the given limits; return it as float.

    ``low``/``high`` are inclusive unless ``low_open``/``high_open`` is set.
    """
    if not is_number(value) or not math.isfinite(float(value)):
        raise FieldError(owner, field, f"must be a finite number, got {show(value)}")
    x = float(value)
    if low is not None and (x < low or (low_open and x == low)):
        rule = f"above {low:g}" if low_open else f"at least {low:g}"
        raise FieldError(owner, field, f"must be {rule}, got {show(value)}")
    if high is not None and (x > high or (high_open and x == high)):
        rule = f"below {high:g}" if high_open else f"at most {high:g}"
        raise FieldError(owner, field, f"must be {rule}, got {show(value)}")
    return x


def positive_int(owner: str, field: str, value, *, high: int | None = None) -> int:
    """Check that `value` is a whole number >= 1 (and <= `high`); return it as int."""
    ok = is_number(value) and math.isfinite(float(value)) and float(value) == int(value)
    if not ok or int(value) < 1 or (high is not None and int(value) > high):
        limit = f" from 1 to {high}" if high is not None else " (1, 2, 3, ...)"
        raise FieldError(owner, field, f"must be a whole number{limit}, got {show(value)}")
    return int(value)


def real_vector(owner: str, field: str, values, *, min_len: int = 1) -> tuple[float, ...]:
    """Check a 1-D sequence of finite real numbers of at least `min_len` items; return a tuple."""
    if isinstance(values, (str, bytes)) or values is None:
        raise FieldError(owner, field, f"must be a list of numbers, got {show(values)}")
    try:
        items = list(values)
    except TypeError:
        raise FieldError(owner, field, f"must be a list of numbers, got {show(values)}") from None
    for i, v in enumerate(items):
        if not is_number(v) or not math.isfinite(float(v)):
            raise FieldError(owner, field,
                             f"item {i + 1} must be a finite number, got {show(v)}")
    if len(items) < min_len:
        need = "at least one value" if min_len == 1 else f"at least {min_len} values"
        raise FieldError(owner, field, f"must hold {need}, got {len(items)}")
    return tuple(float(v) for v in items)


def one_of(owner: str, field: str, value, allowed) -> str:
    """Check that `value` is one of the strings in `allowed`."""
    if not isinstance(value, str) or value not in allowed:
        listing = ", ".join(repr(a) for a in allowed)
        raise FieldError(owner, field, f"must be one of {listing}; got {show(value)}")
    return value


def rate_array(rate_hz) -> np.ndarray:
    """Sample rate(s) as a float array; every value positive and finite, else InputError."""
    rate = np.asarray(rate_hz, dtype=float)
    if rate.size == 0:
        raise InputError("rate_hz: must hold at least one sample rate, got an empty array")
    bad = ~np.isfinite(rate) | (rate <= 0)
    if np.any(bad):
        raise InputError(f"rate_hz: every sample rate must be positive and finite (Hz), "
                         f"got {rate[bad].flat[0]!r}")
    return rate


def freq_array(f_hz, name: str = "f_hz") -> np.ndarray:
    """Frequencies as a float array; every value finite and >= 0, else InputError."""
    try:
        f = np.asarray(f_hz, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name}: must be numbers (Hz), got {show(f_hz)}") from None
    bad = ~np.isfinite(f) | (f < 0)
    if np.any(bad):
        raise InputError(f"{name}: frequencies must be finite and not negative (Hz), "
                         f"got {f[bad].flat[0]!r}")
    return f


def warn(message: str, *, stacklevel: int = 2) -> None:
    """Issue a FoldlineWarning; `stacklevel` counts from the caller of this helper."""
    warnings.warn(message, FoldlineWarning, stacklevel=stacklevel + 1)
