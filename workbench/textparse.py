"""Text entries read into values, shared by the command's options and the notebook panels
(ground floor: imports only :mod:`workbench.errors`).

The same rule reads an order list whether it comes from ``--cut-orders`` or a panel's text
box; only the name the message gives differs (the option, or the box's label).
"""

from __future__ import annotations

import math

from workbench.errors import InputError

__all__ = ["parse_orders"]


def parse_orders(text: str, name: str, example: str = "1,29,4.95") -> tuple:
    """Positive orders separated by commas (or semicolons): ``"1,29,4.95"`` -> (1.0, 29.0, 4.95).

    Parameters
    ----------
    text : str
        The entry.
    name : str
        What the entry is called in the message (a command-line option, a panel's label).
    example : str
        An example entry the message shows.

    Returns
    -------
    tuple of float
        The orders, in the order given.

    Raises
    ------
    InputError
        Not numbers, no order, or an order that is not a positive finite number.
    """
    try:
        vals = tuple(float(v) for v in str(text).replace(";", ",").split(",") if v.strip())
    except ValueError:
        raise InputError(f"{name} {text!r}: give orders separated by commas, e.g. {example}") from None
    if not vals or any(not (math.isfinite(v) and v > 0) for v in vals):
        raise InputError(f"{name} {text!r}: every order must be a positive number, e.g. {example}")
    return vals
