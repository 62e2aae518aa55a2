"""Validation helpers on the ground floor, shared by every layer.

Every validation error foldline raises reads the same way::

    name = value: rule; allowed ...

for example ``rate_hz = -1: must be a positive, finite sample rate (Hz)``.  The value is shown
as it is written in a TOML file (``true``, ``"text"``, ``[1, 2]``), so a message about a file and
a message about a Python argument look alike.  Where the value came from a file, the reader
puts the file and the entry in front: ``plan.toml: [acquisition]: rates_hz = [0]: ...``.

The helpers below hold the rules (what a sample rate is, what an integer is); everything
else imports them.  Domain objects (filters, speed profiles, bands, plans) check their own
fields and raise :class:`FieldError`, an :class:`~workbench.errors.InputError` that remembers
the field, the value and the rule, so a file reader can re-raise it as its own error class
naming the file, the table and the key as the user wrote it (``field``, ``value`` and
``problem`` are kept apart for that).
Public functions check their arguments on entry with the same helpers (``owner=None``: the
message starts with the argument's name); internal functions trust what they are given.
"""

from __future__ import annotations

import difflib
import math
import numbers
import warnings
from collections.abc import Mapping

import numpy as np

from workbench.errors import FoldlineWarning, InputError

class _NoValue:
    def __repr__(self):
        return "NO_VALUE"


#: Marks "no value to show" (a missing key, a rule between two fields).
NO_VALUE = _NoValue()

#: The rule of a sample rate, in every message about one.
RATE_RULE = "must be a positive, finite sample rate (Hz)"


def is_number(value) -> bool:
    """True for real numbers (int, float, numpy scalars), False for bool and everything else."""
    return isinstance(value, numbers.Real) and not isinstance(value, (bool, np.bool_))


def show(value, limit: int = 60) -> str:
    """A value as it is written in a TOML file, shortened to `limit` characters.

    ``True`` -> ``true``, ``"a"`` -> ``"a"``, numbers as Python prints them (``nan``, ``inf``,
    ``-1.0``; numpy scalars without their type), sequences as ``[a, b]``.
    """
    if isinstance(value, (bool, np.bool_)):
        text = "true" if value else "false"
    elif isinstance(value, str):
        text = '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    elif isinstance(value, numbers.Number):
        text = str(value.item() if isinstance(value, np.generic) else value)
    elif isinstance(value, (list, tuple, np.ndarray)):
        items = value.tolist() if isinstance(value, np.ndarray) else value
        if isinstance(value, np.ndarray) and value.ndim != 1:
            text = f"array of shape {value.shape}"
        else:
            text = "[" + ", ".join(show(v, limit) for v in items) + "]"
    else:
        text = repr(value)
    return text if len(text) <= limit else text[:limit - 3] + "..."


def kind_of(value) -> str:
    """What a value is, in TOML's words (``"a string"``, ``"a boolean"``, ``"an array"``)."""
    if isinstance(value, (bool, np.bool_)):
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


def describe(name: str, value=NO_VALUE, rule: str = "") -> str:
    """The message ``name = value: rule`` (``name: rule`` when there is no value to show)."""
    head = name if value is NO_VALUE else f"{name} = {show(value)}"
    return f"{head}: {rule}" if rule else head


def close_names(word, choices, n: int = 1) -> list:
    """Up to `n` of `choices` close to `word` (likely typos of it), closest first.

    The one rule of every "did you mean" hint: :func:`difflib.get_close_matches` with its
    default similarity cutoff 0.6.
    """
    return difflib.get_close_matches(str(word), [str(c) for c in choices], n=n, cutoff=0.6)


def closest(word, choices) -> str | None:
    """The one of `choices` closest to `word` (a likely typo), or None."""
    if not isinstance(word, str):
        return None
    close = close_names(word, choices)
    return close[0] if close else None


def suggest(word, choices) -> str:
    """``'; did you mean "x"?'`` for the closest of `choices` to `word`, or ``""``."""
    close = closest(word, choices)
    return f"; did you mean {show(close)}?" if close is not None else ""


class FieldError(InputError):
    """A bad value in one named field of a domain object (or one argument of a function).

    The message is ``owner: field = value: rule`` (:func:`describe`).

    Parameters
    ----------
    owner : str or None
        The object, e.g. ``"AntiAliasFilter"``; None for a function's argument.
    field : str
        The field (or argument) name.
    problem : str
        The rule broken and what is allowed, e.g. ``"must be above 0"``.
    value : object, optional
        The bad value; left out of the message when not given (a missing field, a rule that
        ties two fields together).
    """

    def __init__(self, owner: str | None, field: str, problem: str, value=NO_VALUE):
        self.owner = owner
        self.field = field
        self.problem = problem
        self.value = value
        text = describe(field, value, problem)
        super().__init__(f"{owner}: {text}" if owner else text)



def _notes(*notes) -> str:
    """`` (a; b)`` of the notes that are not empty, or ``""``."""
    notes = [n for n in notes if n]
    return f" ({'; '.join(notes)})" if notes else ""


def _why(value) -> str:
    """Why `value` is no finite number: ``got a string``, ``not inf or nan``, or ``""``."""
    if not is_number(value):
        return f"got {kind_of(value)}"
    return "" if math.isfinite(float(value)) else "not inf or nan"


# --------------------------------------------------------------------------------------------
# Scalars
# --------------------------------------------------------------------------------------------


def real(owner: str | None, field: str, value, *, low=None, high=None, low_open=False,
         high_open=False, unit: str = "") -> float:
    """Check that `value` is a finite real number inside the given limits; return it as float.

    ``low``/``high`` are inclusive unless ``low_open``/``high_open`` is set; `unit` (``"Hz"``)
    is named in the rule.
    """
    if _why(value):
        raise FieldError(owner, field, "must be a finite number" + _notes(unit, _why(value)),
                         value)
    x = float(value)
    rules = []
    if low is not None:
        rules.append(f"above {low:g}" if low_open else f"at least {low:g}")
    if high is not None:
        rules.append(f"below {high:g}" if high_open else f"at most {high:g}")
    if ((low is not None and (x < low or (low_open and x == low)))
            or (high is not None and (x > high or (high_open and x == high)))):
        raise FieldError(owner, field, f"must be {' and '.join(rules)}{_notes(unit)}", value)
    return x


def positive(owner: str | None, field: str, value, *, unit: str = "") -> float:
    """Check that `value` is a finite number > 0; return it as float."""
    why = _why(value) or ("> 0" if float(value) <= 0 else "")
    if why:
        raise FieldError(owner, field, "must be a positive number" + _notes(unit, why), value)
    return float(value)


def rate_hz(owner: str | None, field: str, value) -> float:
    """Check that `value` is one sample rate: a finite number of Hz > 0; return it as float."""
    if not is_number(value) or not math.isfinite(float(value)) or float(value) <= 0:
        raise FieldError(owner, field, RATE_RULE, value)
    return float(value)


def positive_int(owner: str | None, field: str, value, *, low: int = 1,
                 high: int | None = None, whole_float: bool = True, what: str = "") -> int:
    """Check that `value` is an integer from `low` (default 1) to `high`; return it as int.

    A float with a whole value (``8.0``) is accepted unless `whole_float` is False; bool never
    is.  `what` (``"samples per block"``) is added to the rule in brackets.
    """
    word = "a positive integer" if low == 1 else f"an integer >= {low}"
    if whole_float:
        whole = is_number(value) and math.isfinite(float(value)) and float(value) == int(value)
    else:
        whole = isinstance(value, numbers.Integral) and not isinstance(value, (bool, np.bool_))
    if not whole:
        raise FieldError(owner, field, f"must be {word}" + _notes(what, f"got {kind_of(value)}"),
                         value)
    if int(value) < low:
        raise FieldError(owner, field, f"must be {word}" + _notes(what), value)
    if high is not None and int(value) > high:
        raise FieldError(owner, field, f"must be an integer from {low} to {high}" + _notes(what),
                         value)
    return int(value)


def choice(owner: str | None, field: str, value, allowed):
    """Check that `value` is one of `allowed` (strings); return it.

    The message lists what is allowed and suggests the closest name.
    """
    if not isinstance(value, str) or value not in allowed:
        listing = ", ".join(show(a) for a in allowed)
        close = closest(value, allowed)
        hint = f" (did you mean {show(close)}?)" if close is not None else ""
        raise FieldError(owner, field, f"must be one of {listing}{hint}", value)
    return value


def text(owner: str | None, field: str, value) -> str:
    """Check that `value` is a non-empty text without leading or trailing spaces; return it."""
    if not isinstance(value, str) or not value or value != value.strip() \
            or not value.isprintable():
        got = f" (got {kind_of(value)})" if not isinstance(value, str) else ""
        raise FieldError(owner, field, "must be a non-empty string of printable characters "
                                       f"without leading or trailing spaces{got}", value)
    return value


# --------------------------------------------------------------------------------------------
# Sequences and arrays
# --------------------------------------------------------------------------------------------


def real_vector(owner: str | None, field: str, values, *, min_len: int = 1) -> tuple[float, ...]:
    """Check a 1-D sequence of finite real numbers of at least `min_len` items; return a tuple."""
    if isinstance(values, (str, bytes)) or values is None:
        raise FieldError(owner, field, f"must be a list of numbers (got {kind_of(values)})",
                         values)
    try:
        items = list(values)
    except TypeError:
        raise FieldError(owner, field, f"must be a list of numbers (got {kind_of(values)})",
                         values) from None
    for i, v in enumerate(items):
        if not is_number(v) or not math.isfinite(float(v)):
            raise FieldError(owner, field, f"item {i + 1} must be a finite number", values)
    if len(items) < min_len:
        need = "at least one value" if min_len == 1 else f"at least {min_len} values"
        raise FieldError(owner, field, f"must hold {need}", values)
    return tuple(float(v) for v in items)


def _first_bad(array, bad) -> object:
    return array[bad].flat[0].item()


def rate_array(rate_hz, name: str = "rate_hz") -> np.ndarray:
    """Sample rate(s) as a float array; every value a positive, finite number of Hz."""
    try:
        rate = np.asarray(rate_hz, dtype=float)
    except (TypeError, ValueError):
        raise FieldError(None, name, RATE_RULE, rate_hz) from None
    if rate.size == 0:
        raise FieldError(None, name, "must hold at least one sample rate", rate_hz)
    bad = ~np.isfinite(rate) | (rate <= 0)
    if np.any(bad):
        raise FieldError(None, name, RATE_RULE, _first_bad(rate, bad))
    return rate


def freq_array(f_hz, name: str = "f_hz") -> np.ndarray:
    """Frequencies as a float array; every value finite and >= 0 (Hz)."""
    return real_array(f_hz, name, "frequencies", "Hz")


def real_array(values, name: str, what: str = "values", unit: str = "", *,
               positive: bool = False) -> np.ndarray:
    """`values` as a float array; every one finite and >= 0 (> 0 with `positive`).

    `what` (``"frequencies"``) and `unit` (``"Hz"``) name them in the message.
    """
    in_unit = f" ({unit})" if unit else ""
    try:
        a = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise FieldError(None, name, f"must be numbers{in_unit}", values) from None
    bad = ~np.isfinite(a) | ((a <= 0) if positive else (a < 0))
    if np.any(bad):
        rule = "positive and finite" if positive else "finite and not negative"
        raise FieldError(None, name, f"{what} must be {rule}{in_unit}", _first_bad(a, bad))
    return a


def warn(message: str, *, stacklevel: int = 2) -> None:
    """Issue a FoldlineWarning; `stacklevel` counts from the caller of this helper."""
    warnings.warn(message, FoldlineWarning, stacklevel=stacklevel + 1)
