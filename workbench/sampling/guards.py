"""Plausibility checks of acquisition settings: one-line warnings for likely slips.

A rate typed in kHz where Hz are meant (``--rate 10.24`` for 10240 S/s) gives a fold map in
which every line folds, and nothing stops the computation; so does a rate that lies below the
machine's slowest line at top speed.  These checks do not refuse (the value may be meant); they
warn in one line and say what was probably meant.  No anti-alias filter (``filter = "none"``)
is legal too, but what then folds is more than the fold map shows: :data:`NO_FILTER_NOTE`.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from workbench.errors import FoldlineWarning

__all__ = ["rate_warnings", "warn_implausible_rate", "MIN_PLAUSIBLE_RATE_HZ", "NO_FILTER_NOTE"]

#: Below this a vibration sample rate is almost certainly a slip (kHz typed for Hz): even
#: order 1 of a 3000 rpm shaft (50 Hz) needs more (common practice, no source).
MIN_PLAUSIBLE_RATE_HZ = 100.0

#: Said by the advisor (and shown by the panel) when the plan has no anti-alias filter.
NO_FILTER_NOTE = ("filter \"none\": with no anti-alias filter everything above Nyquist folds "
                  "unattenuated, and the fold map shows only the lines of the machine file; "
                  "broadband noise and anything unmodelled (other machines, electrical pickup, "
                  "structural resonances, harmonics not listed) fold into the measured band "
                  "unseen. Use the recorder's anti-alias filter and describe it in the plan.")


def _slowest_line(lines, top_rpm):
    """(name, Hz) of the lowest line frequency at top speed, or None."""
    best = None
    for ln in lines or ():
        try:
            f = float(np.max(np.asarray(ln.hz_at(np.asarray([top_rpm], dtype=float)))))
        except Exception:  # a line object without a usable frequency is not ours to judge
            continue
        if f > 0 and math.isfinite(f) and (best is None or f < best[1]):
            best = (getattr(ln, "name", "?"), f)
    return best


def rate_warnings(rate_hz: float, *, lines=(), top_rpm: float | None = None,
                  name: str = "rate") -> tuple:
    """Warnings for a sample rate that is probably a slip.

    Parameters
    ----------
    rate_hz : float
        The sample rate, Hz.
    lines : sequence of Line, optional
        The machine's lines (objects with ``name`` and ``hz_at(rpm)``).
    top_rpm : float, optional
        Top speed of the test, rpm; with `lines`, the rate is compared with the slowest line
        there.
    name : str
        How the rate is named in the message (``"--rate"``, ``"rates_hz"``).

    Returns
    -------
    tuple of str
        One line each; empty when the rate is plausible.
    """
    rate = float(rate_hz)
    out = []
    khz = f"did you mean {rate:g} kHz ({rate * 1000:g} Hz)? rates are given in Hz"
    if 0 < rate < MIN_PLAUSIBLE_RATE_HZ:
        out.append(f"{name} {rate:g} Hz is below {MIN_PLAUSIBLE_RATE_HZ:g} Hz, too low to record "
                   f"vibration: {khz}")
    if top_rpm is not None and rate > 0:
        slow = _slowest_line(lines, float(top_rpm))
        if slow is not None and rate < slow[1]:
            out.append(f"{name} {rate:g} Hz is below the machine's slowest line at top speed "
                       f"({slow[0]}, {slow[1]:.1f} Hz at {float(top_rpm):g} rpm): every line folds"
                       + ("" if rate >= MIN_PLAUSIBLE_RATE_HZ else f"; {khz}"))
    if len(out) == 2:  # one line is enough when both say the same
        out = [out[1]]
    return tuple(out)


def warn_implausible_rate(rate_hz: float, *, lines=(), top_rpm=None, name: str = "rate",
                          stacklevel: int = 3) -> None:
    """Issue :func:`rate_warnings` as :class:`~workbench.errors.FoldlineWarning` s."""
    for text in rate_warnings(rate_hz, lines=lines, top_rpm=top_rpm, name=name):
        warnings.warn(text, FoldlineWarning, stacklevel=stacklevel)
