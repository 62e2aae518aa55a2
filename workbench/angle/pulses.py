"""Pulse detection: the edges of a tacho channel, as pulse times.

A tacho channel gives one voltage pulse per tooth (or per reflective mark) passing a sensor.
:func:`detect_pulses` (or the streaming :class:`PulseDetector`, fed chunk by chunk) turns the
channel into pulse times with a Schmitt trigger and sub-sample interpolation of each edge;
:func:`workbench.angle.pulse_angles.tacho_angle` turns the pulse times into a shaft angle.

Conventions: times in seconds from the first sample of the record (sample ``n`` is at
``n / rate_hz``).
"""

from __future__ import annotations

import math

import numpy as np

from workbench import checks
from workbench.checks import show
from workbench.angle._common import CHUNK_SAMPLES, iter_chunks, one_d
from workbench.errors import InputError, TachoError

__all__ = [
    "PulseDetector",
    "detect_pulses",
]

# Percentiles that set the automatic trigger level: robust to a few spikes, and inside the
# high level of pulses down to about 1 % duty cycle.
_LEVEL_PERCENTILES = (0.5, 99.5)
# Default hysteresis as a fraction of the span between those percentiles.
_HYSTERESIS_FRACTION = 0.2

# --------------------------------------------------------------------------------------------
# Pulse detection
# --------------------------------------------------------------------------------------------

def _robust_span(x: np.ndarray) -> tuple[float, float]:
    """Low and high levels of a pulse signal from robust percentiles of (a subsample of) it."""
    step = max(1, len(x) // 2_000_000)
    lo, hi = np.percentile(x[::step], _LEVEL_PERCENTILES)
    return float(lo), float(hi)


class PulseDetector:
    """Streaming Schmitt-trigger edge detector with sub-sample crossing times.

    Feed the tacho channel chunk by chunk (any lengths); the detector keeps its state (last
    sample, trigger state, the crossing that opened the current excursion) across chunks, so the
    result does not depend on how the record is cut.

    Parameters
    ----------
    rate_hz : float
        Sample rate of the tacho channel (Hz).
    level : float, optional
        Trigger level in the channel's units.  Default: midway between the 0.5th and 99.5th
        percentiles of the first chunk that is not flat (give it explicitly when the first chunk
        may hold no pulse, e.g. a stream that starts at standstill).
    hysteresis : float, optional
        Width of the Schmitt band centred on ``level`` (same units, >= 0).  An edge counts once
        the signal has been below ``level - hysteresis/2`` and then rises above
        ``level + hysteresis/2``.  Default: 0.2 x the span between those percentiles.
    edge : {"rising", "falling"}
        Which edges to time.

    Notes
    -----
    Each edge is timed where the signal crosses ``level`` for the last time before it leaves
    the hysteresis band, by linear interpolation between the two samples around the crossing.
    Without interpolation the timing error is up to one sample (0.70 degrees of shaft angle at
    6000 rpm and 51.2 kHz); with it, the error on a smooth edge is a small fraction of a sample.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(1000) / 1000.0
    >>> tacho = np.where((t * 10) % 1 < 0.5, 5.0, 0.0)        # 10 pulses per second
    >>> det = PulseDetector(1000.0)
    >>> for chunk in np.array_split(tacho, 7):
    ...     _ = det.feed(chunk)
    >>> np.round(det.finish()[:3], 4)
    array([0.0995, 0.1995, 0.2995])
    """

    def __init__(self, rate_hz: float, *, level: float | None = None,
                 hysteresis: float | None = None, edge: str = "rising"):
        self.rate_hz = checks.rate_hz(None, "rate_hz", rate_hz)
        if edge not in ("rising", "falling"):
            raise InputError(f"edge = {show(edge)}: must be 'rising' or 'falling'")
        self.edge = edge
        self._sign = 1.0 if edge == "rising" else -1.0
        self.level = None if level is None else checks.real(None, "level", level)
        if hysteresis is not None:
            hysteresis = checks.real(None, "hysteresis", hysteresis)
            if hysteresis < 0:
                raise InputError(f"hysteresis = {show(hysteresis)}: must be a number "
                                 ">= 0 in the tacho's units")
        self.hysteresis = hysteresis
        self._n_seen = 0            # samples fed so far
        self._prev: float | None = None   # last sample (sign-adjusted)
        self._state = -1            # -1 unknown, 0 low, 1 high
        self._open_start = math.nan  # crossing position (samples) that opened the open segment
        self._open_conf = False     # the open segment already passed its threshold
        self._times: list[np.ndarray] = []
        self._min = math.inf
        self._max = -math.inf
        self._finished = False

    @property
    def n_samples(self) -> int:
        """Samples fed so far."""
        return self._n_seen

    def _set_levels(self, chunk: np.ndarray) -> bool:
        """Fix level/hysteresis from this chunk if not given; False while the signal is flat."""
        if self.level is not None and self.hysteresis is not None:
            return True
        lo, hi = _robust_span(chunk)
        if not hi > lo:
            return False
        if self.level is None:
            self.level = 0.5 * (lo + hi)
        if self.hysteresis is None:
            self.hysteresis = _HYSTERESIS_FRACTION * (hi - lo)
        return True

    def feed(self, chunk) -> np.ndarray:
        """Process the next chunk of the tacho channel.

        Parameters
        ----------
        chunk : array_like, shape (n,)
            Consecutive samples (not modified).

        Returns
        -------
        ndarray of float64
            Times (s) of the edges completed in this chunk.
        """
        if self._finished:
            raise InputError("PulseDetector.feed called after finish(); create a new detector")
        x = one_d(chunk, "tacho chunk")
        if len(x) == 0:
            return np.empty(0)
        if self.level is None or self.hysteresis is None:
            cmin, cmax = float(np.min(x)), float(np.max(x))
            if not (math.isfinite(cmin) and math.isfinite(cmax)):
                raise InputError(f"tacho chunk starting at sample {self._n_seen} holds NaN or "
                                 "infinite values; allowed: finite numbers")
            self._min, self._max = min(self._min, cmin), max(self._max, cmax)
            if not self._set_levels(x):
                # Flat so far: nothing can cross; remember the last value only.
                self._prev = self._sign * float(x[-1])
                self._n_seen += len(x)
                return np.empty(0)
        out = self._process(x)
        self._n_seen += len(x)
        if len(out):
            self._times.append(out)
        return out

    def _process(self, x: np.ndarray) -> np.ndarray:
        s = self._sign
        lev = s * self.level
        half = 0.5 * self.hysteresis
        hi_th, lo_th = lev + half, lev - half
        y = x if s > 0 else -x
        if self._prev is not None:
            ye = np.empty(len(y) + 1, dtype=np.float64)
            ye[0] = self._prev
            ye[1:] = y
            base = self._n_seen - 1
            continuing = True
        else:
            ye = np.asarray(y, dtype=np.float64)
            base = self._n_seen
            continuing = False
        above = ye >= lev
        d = np.flatnonzero(above[1:] != above[:-1]) + 1
        starts = np.concatenate(([0], d))
        mx = np.maximum.reduceat(ye, starts)
        mn = np.minimum.reduceat(ye, starts)
        if not (np.isfinite(mx).all() and np.isfinite(mn).all()):
            raise InputError(f"tacho chunk starting at sample {self._n_seen} holds NaN or "
                             "infinite values; allowed: finite numbers")
        gmax, gmin = float(mx.max()), float(mn.min())
        if s > 0:
            self._min, self._max = min(self._min, gmin), max(self._max, gmax)
        else:
            self._min, self._max = min(self._min, -gmax), max(self._max, -gmin)
        side = above[starts]
        conf_hi = side & (mx > hi_th)
        conf_lo = ~side & (mn < lo_th)
        # Sub-sample position of each level crossing (start of each segment but the first).
        y0, y1 = ye[d - 1], ye[d]
        pos = (d - 1 + base) + (lev - y0) / (y1 - y0)     # integer part first: same bits
                                                          # however the record is cut
        seg_start = np.concatenate(([self._open_start if continuing else math.nan], pos))
        conf = conf_hi | conf_lo
        if continuing and self._open_conf:
            conf[0] = False          # already counted in the previous chunk
        ci = np.flatnonzero(conf)
        times = np.empty(0)
        if len(ci):
            types = conf_hi[ci].astype(np.int8)
            prev_type = np.concatenate(([self._state], types[:-1]))
            rising = (types == 1) & (prev_type == 0)
            times = seg_start[ci[rising]] / self.rate_hz
            self._state = int(types[-1])
        last = len(starts) - 1
        self._open_start = float(seg_start[last])
        self._open_conf = bool(conf_hi[last] | conf_lo[last]) or (
            last == 0 and continuing and self._open_conf)
        self._prev = float(ye[-1])
        return times

    @property
    def pulse_times_s(self) -> np.ndarray:
        """Edge times (s) found so far."""
        return np.concatenate(self._times) if self._times else np.empty(0)

    def finish(self) -> np.ndarray:
        """End of the stream: return all edge times (s).

        Raises
        ------
        TachoError
            If the channel was flat or no edge crossed the trigger band; the message gives the
            signal's min and max and the band used.
        """
        self._finished = True
        times = self.pulse_times_s
        if self._n_seen == 0:
            raise TachoError("the tacho channel is empty; no pulses can be found")
        if self.level is None or self.hysteresis is None:
            raise TachoError(f"the tacho channel is flat (min {self._min:g}, max {self._max:g}): "
                             "no pulses can be found; check that the tacho channel is the right "
                             "one and that its sensor was connected")
        if len(times) == 0:
            half = 0.5 * self.hysteresis
            raise TachoError(
                f"no {self.edge} edges crossed the trigger band {self.level - half:g} .. "
                f"{self.level + half:g} (level {self.level:g}, hysteresis {self.hysteresis:g}); "
                f"the tacho signal spans min {self._min:g}, max {self._max:g}; give level and "
                "hysteresis inside that span, or check the tacho channel")
        return times


def detect_pulses(tacho, rate_hz: float, *, level: float | None = None,
                  hysteresis: float | None = None, edge: str = "rising") -> np.ndarray:
    """Pulse times of a tacho channel: Schmitt trigger with sub-sample interpolation.

    Parameters
    ----------
    tacho : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The tacho channel.  A whole array is processed in chunks of about a million samples,
        so memory stays small; chunks let a record far larger than memory be processed.
    rate_hz : float
        Sample rate (Hz).
    level, hysteresis : float, optional
        Trigger level and width of the Schmitt band (channel units).  Default: from the 0.5th
        and 99.5th percentiles of the whole array (of the first non-flat chunk for a stream):
        level midway, hysteresis 0.2 x their span.
    edge : {"rising", "falling"}
        Which edges to time.

    Returns
    -------
    ndarray of float64, shape (n_pulses,)
        Edge times in seconds from the first sample (sample ``i`` is at ``i / rate_hz``).

    Raises
    ------
    TachoError
        A flat channel, or no edge crossing the band (the message gives min and max).

    See Also
    --------
    PulseDetector : the streaming detector this wraps.
    tacho_angle : pulse times to shaft angle.

    Examples
    --------
    >>> import numpy as np
    >>> rate = 10_000.0
    >>> t = np.arange(20_000) / rate
    >>> tacho = 2.5 + 2.5 * np.tanh(20 * np.sin(2 * np.pi * 25.0 * t))   # 25 pulses/s
    >>> np.round(np.diff(detect_pulses(tacho, rate))[:3], 6)
    array([0.04, 0.04, 0.04])
    """
    det = PulseDetector(rate_hz, level=level, hysteresis=hysteresis, edge=edge)
    if isinstance(tacho, np.ndarray) or isinstance(tacho, (list, tuple)) and tacho \
            and np.isscalar(tacho[0]):
        x = one_d(tacho, "tacho")
        if len(x) == 0:
            raise TachoError("the tacho channel is empty; no pulses can be found")
        if (level is None or hysteresis is None):
            lo, hi = _robust_span(x)
            if not hi > lo:
                raise TachoError(f"the tacho channel is flat (min {np.min(x):g}, max "
                                 f"{np.max(x):g}): no pulses can be found; check that the tacho "
                                 "channel is the right one and that its sensor was connected")
            det._set_levels(x)
        for i in range(0, len(x), CHUNK_SAMPLES):
            det.feed(x[i:i + CHUNK_SAMPLES])
        return det.finish()
    for chunk in iter_chunks(tacho, "tacho"):
        det.feed(chunk)
    return det.finish()
