"""Folding of a frequency by sampling: apparent frequency and Nyquist zone.

Sampling at ``rate_hz`` cannot tell a frequency ``f`` from ``|f - k * rate_hz|`` for any whole
``k``; the spectrum of the samples shows every line at its *apparent frequency* in
``[0, rate_hz / 2]``.  The *zone* counts the half-rates below ``f``:

    zone = floor(f / (rate_hz / 2))

zone 0 is direct (the line shows where it is), zone >= 1 is folded.  Even zones show at
``f mod (rate/2)``, odd zones at ``rate/2 - (f mod (rate/2))``.

Conventions at the zone edges (exact, not subject to rounding of ``f / (rate/2)``):

* ``f`` exactly at Nyquist is zone 1 and shows at Nyquist (``6400 Hz`` at ``12800 S/s`` gives
  ``6400 Hz``, zone 1);
* ``f`` exactly at a multiple of the rate is an even zone and shows at 0 Hz (``12800 Hz`` at
  ``12800 S/s`` gives ``0 Hz``, zone 2).
"""

from __future__ import annotations

import numpy as np

from workbench.checks import FieldError, freq_array, rate_array, real_array

__all__ = ["apparent_frequency", "nyquist_zone", "apparent_order", "fold", "fold_arrays"]

# Beyond this many half-rates the zone index no longer fits a float mantissa exactly.
_MAX_ZONE = 2.0**52


def _fold(f_hz, rate_hz) -> tuple[np.ndarray, np.ndarray]:
    """Shared worker: (apparent frequency in Hz, zone as int64), broadcast over both inputs."""
    return fold_arrays(freq_array(f_hz), rate_array(rate_hz))


def fold_arrays(f: np.ndarray, rate: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(apparent frequency in Hz, zone as int64) of float arrays already checked.

    For callers inside the layer that checked `f` (finite, >= 0) and `rate` (positive,
    finite) at their own entry; :func:`fold` checks them itself.
    """
    f, rate = np.broadcast_arrays(f, rate)
    half = rate / 2.0  # exact in binary floating point
    with np.errstate(over="ignore"):
        n = np.floor(f / half)
    if np.any(n > _MAX_ZONE):
        i = np.argmax(n > _MAX_ZONE)
        f_bad, rate_bad = float(f.flat[i]), float(rate.flat[i])
        raise FieldError(
            None, "f_hz", f"lies more than 2**52 half-rates above rate_hz = {rate_bad:g}; "
            f"folding cannot be computed exactly there; allowed: sample rates above "
            f"{f_bad / 2.0**51:.3g} Hz for this frequency", f_bad)
    # f / half can round across a zone edge; move n so that n * half <= f < (n + 1) * half.
    # n * half is exact whenever f is an exact multiple of half, so edges land exactly.
    n = np.where(n * half > f, n - 1.0, n)
    n = np.where((n + 1.0) * half <= f, n + 1.0, n)
    rest = np.clip(f - n * half, 0.0, half)
    zone = n.astype(np.int64)
    apparent = np.where((zone & 1).astype(bool), half - rest, rest)
    return apparent, zone


def fold(f_hz, rate_hz):
    """Apparent frequency and Nyquist zone together, in one pass (see the two functions below).

    Parameters
    ----------
    f_hz : array_like
        True frequencies in Hz, finite and not negative.
    rate_hz : array_like
        Sample rates in Hz, positive and finite; broadcast against `f_hz`.

    Returns
    -------
    apparent_hz : ndarray
        As :func:`apparent_frequency`.
    zone : ndarray of int64
        As :func:`nyquist_zone`.
    """
    return _fold(f_hz, rate_hz)


def apparent_frequency(f_hz, rate_hz):
    """Frequency at which a line of true frequency `f_hz` shows after sampling at `rate_hz`.

    Parameters
    ----------
    f_hz : array_like
        True frequencies in Hz, finite and not negative.
    rate_hz : array_like
        Sample rates in Hz, positive and finite.  Broadcast against `f_hz`.

    Returns
    -------
    apparent_hz : ndarray or float
        Apparent frequencies in Hz, in ``[0, rate_hz / 2]``, with the broadcast shape of the
        inputs (a numpy scalar when both are scalars).

    Raises
    ------
    InputError
        A frequency is negative or not finite, or a rate is not positive and finite.

    Notes
    -----
    Equal to ``|f - rate * round(f / rate)|``; computed from the zone (see
    :func:`nyquist_zone`) so that edges are exact: a line exactly at Nyquist shows at Nyquist,
    a line exactly at a multiple of the rate shows at 0 Hz.

    References
    ----------
    .. [1] C. E. Shannon, "Communication in the presence of noise", Proceedings of the IRE
       37(1):10-21, 1949.

    Examples
    --------
    >>> from workbench.sampling import apparent_frequency
    >>> [float(apparent_frequency(f, 12800.0)) for f in (5000, 9000, 14000, 12800)]
    [5000.0, 3800.0, 1200.0, 0.0]
    """
    apparent, _ = _fold(f_hz, rate_hz)
    return apparent[()]


def nyquist_zone(f_hz, rate_hz):
    """Nyquist zone ``floor(f / (rate/2))`` of true frequency `f_hz` sampled at `rate_hz`.

    Parameters
    ----------
    f_hz : array_like
        True frequencies in Hz, finite and not negative.
    rate_hz : array_like
        Sample rates in Hz, positive and finite.  Broadcast against `f_hz`.

    Returns
    -------
    zone : ndarray of int64 or int64
        0 for direct lines (below Nyquist), 1 and above for folded lines; broadcast shape.

    Raises
    ------
    InputError
        A frequency is negative or not finite, or a rate is not positive and finite.

    Notes
    -----
    Exact at zone edges: a frequency exactly at Nyquist is zone 1, exactly at the rate zone 2.

    Examples
    --------
    >>> from workbench.sampling import nyquist_zone
    >>> [int(nyquist_zone(f, 12800.0)) for f in (5000, 6400, 9000, 12800, 14000)]
    [0, 1, 1, 2, 2]
    """
    _, zone = _fold(f_hz, rate_hz)
    return zone[()]


def apparent_order(f_hz, rate_hz, rpm):
    """Apparent frequency of `f_hz` sampled at `rate_hz`, as a multiple of the shaft speed.

    Parameters
    ----------
    f_hz : array_like
        True frequencies in Hz, finite and not negative.
    rate_hz : array_like
        Sample rates in Hz, positive and finite.
    rpm : array_like
        Reference shaft speeds in rev/min, positive and finite.  All three inputs broadcast.

    Returns
    -------
    order : ndarray or float
        ``apparent_frequency(f_hz, rate_hz) / (rpm / 60)``; where a folded line sits on an
        order axis.

    Examples
    --------
    >>> from workbench.sampling import apparent_order
    >>> float(apparent_order(9000.0, 12800.0, 6000.0))   # 3800 Hz at 100 rev/s
    38.0
    """
    speed = real_array(rpm, "rpm", "shaft speeds", "rev/min", positive=True)
    apparent, _ = _fold(f_hz, rate_hz)
    return (apparent / (speed / 60.0))[()]
