"""Speed without a tacho: from an order's ridge in the vibration, or from an analogue speed channel.

:func:`speed_from_vibration` follows one order of the reference shaft through the record:

1. **decimate** the channel (streamed, chunk by chunk, with a Kaiser-window FIR) to a rate a few
   times the highest frequency it needs (the order's harmonics at the top of the rpm range);
2. **ridge**: a short-time Fourier transform, a harmonic score per candidate speed (the energy
   at the order and at its harmonics, so that a harmonic stronger than the order does not
   capture the ridge, and a lone line is not taken for a harmonic of a lower order), lines
   whose frequency stays constant through the record (mains, a fixed resonance) flattened, and
   the path of highest score with a smoothness penalty (dynamic programming, Viterbi);
3. **phase demodulation**: the order's component is shifted to 0 Hz along the ridge, low-passed
   (a band-pass that follows the ridge, ``bandwidth_orders`` wide), and its unwrapped phase plus
   the ridge's phase is the order's phase; its slope is the speed.  Fixed lines inside that
   band are estimated away from the crossings and subtracted first.

:func:`speed_from_channel` turns a drive's analogue speed output (units x rpm per unit) into a
speed, low-passed and decimated.

Both return a :class:`SpeedEstimate`: a time grid, the speed on it, its RMS relative
uncertainty (per point and over the record), and the :class:`ShaftAngle` that integrates it.

Conventions: time in seconds from the first sample (sample ``n`` at ``n / rate_hz``), speed in
rpm at the user's edge, uncertainties as fractions (``0.002`` is 0.2 %).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from scipy import signal
from scipy.ndimage import maximum_filter1d, median_filter, uniform_filter1d

from workbench import checks
from workbench.checks import show
from workbench.angle._common import CHUNK_SAMPLES, iter_chunks
from workbench.angle.shaft_angle import ShaftAngle, _readonly   # one read-only copy rule
from workbench.errors import FoldlineWarning, InputError

__all__ = ["SpeedEstimate", "speed_from_vibration", "speed_from_channel",
           "VIBRATION_TOLERANCE", "CHANNEL_TOLERANCE"]

#: Default tolerance of :func:`speed_from_vibration` (RMS relative speed uncertainty, a
#: fraction): 0.2 %, the accuracy a run-up tracked without a tacho is expected to reach.
#: Beyond it the result comes with a one-line warning.  A constant speed error e moves order
#: k by k e orders: 0.2 % puts order 25 off by 0.05 orders, one bin at 20 revs per block.
VIBRATION_TOLERANCE = 2e-3
#: Default tolerance of :func:`speed_from_channel` (a fraction): 0.2 %, as for the vibration.
CHANNEL_TOLERANCE = 2e-3

# Ridge: compression of the spectral score (natural log of the power above the noise floor,
# capped so one very strong line cannot outweigh the rest of the harmonic family).
_SCORE_CAP = 8.0
# Weight of harmonic h in the score: _HARMONIC_WEIGHT ** (h - 1) (subharmonic summation,
# Hermes 1988): the order itself counts most, so a lone line is read as the order, not as the
# 2nd harmonic of half the speed.
_HARMONIC_WEIGHT = 0.84
# A bin holds a fixed line when its median power over the record is this far (ratio) above the
# median of its neighbours' (10 dB).
_FIXED_RATIO = 10.0
# Smoothness penalty of the ridge path, in score units, for a jump of the largest allowed size
# in one hop (quadratic in the jump).
_JUMP_PENALTY = 1.0
# When the best path without flattening stays at one frequency (a constant speed, or a fixed
# line holding it), the path found with fixed lines flattened is kept only if it moves and
# scores at least this share of the other: an order moving beside a strong fixed line.
_FLAT_SHARE = 0.5
# Decimation: the decimated rate is at least this many times the highest frequency used.
_OVERSAMPLE = 2.5
# Stopband attenuation of the decimation filter, dB.
_DECIMATE_DB = 80.0


# --------------------------------------------------------------------------------------------
# Result
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class SpeedEstimate:
    """A speed found without a tacho, with its uncertainty and the shaft angle it implies.

    Attributes
    ----------
    time_s : ndarray, shape (n,)
        Time grid (s), strictly increasing.
    rpm : ndarray, shape (n,)
        Speed of the reference shaft at those times (rpm), > 0.
    uncertainty : ndarray, shape (n,)
        Estimated RMS relative error of ``rpm`` at each point (a fraction: 0.001 is 0.1 %).
    speed_uncertainty : float
        The RMS of ``uncertainty`` over the record (a fraction).
    source : str
        ``"vibration"`` or ``"channel"``.
    method : str
        How the speed was found, one line (for a log).
    angle : ShaftAngle
        The angle integrating ``rpm`` (``ShaftAngle.from_speed_table``).
    fixed_lines_hz : tuple of float
        Lines of constant frequency found (and flattened, subtracted) while tracking an order.
    ridge_time_s, ridge_rpm : ndarray
        The coarse time-frequency ridge (frame centres, rpm) the demodulation followed.
    log : tuple of str
        What was done, one entry per step.
    """

    time_s: np.ndarray
    rpm: np.ndarray
    uncertainty: np.ndarray
    speed_uncertainty: float
    source: str
    method: str
    angle: ShaftAngle
    fixed_lines_hz: tuple = ()
    ridge_time_s: np.ndarray = field(default_factory=lambda: np.empty(0))
    ridge_rpm: np.ndarray = field(default_factory=lambda: np.empty(0))
    log: tuple = ()

    def __post_init__(self):
        for name in ("time_s", "rpm", "uncertainty", "ridge_time_s", "ridge_rpm"):
            object.__setattr__(self, name, _readonly(getattr(self, name)))
        if not (self.time_s.shape == self.rpm.shape == self.uncertainty.shape):
            raise InputError("SpeedEstimate: time_s, rpm and uncertainty must have one shape")
        object.__setattr__(self, "fixed_lines_hz", tuple(float(f) for f in self.fixed_lines_hz))
        object.__setattr__(self, "log", tuple(str(s) for s in self.log))

    @property
    def rpm_min(self) -> float:
        """Lowest speed (rpm)."""
        return float(self.rpm.min())

    @property
    def rpm_max(self) -> float:
        """Highest speed (rpm)."""
        return float(self.rpm.max())


def _shaft_angle(t: np.ndarray, rpm: np.ndarray, what: str) -> ShaftAngle:
    """ShaftAngle of a speed table; refuses a stop or a reversal inside it, naming the seconds."""
    bad = np.flatnonzero(~(rpm > 0))
    if len(bad):
        raise InputError(f"the speed from the {what} falls to {float(np.nanmin(rpm)):.4g} rpm "
                         f"between {t[bad[0]]:.3f} s and {t[bad[-1]]:.3f} s: a stop or a "
                         "reversal cannot be tracked; cut the record to where the shaft turns")
    return ShaftAngle.from_speed_table(t, rpm)


def _warn_if_uncertain(u: float, tolerance: float, what: str) -> None:
    if not (u <= tolerance):
        warnings.warn(f"speed from the {what} is uncertain by {100 * u:.3g} % RMS (tolerance "
                      f"{100 * tolerance:.3g} %)", FoldlineWarning, stacklevel=3)


# --------------------------------------------------------------------------------------------
# Streaming decimation
# --------------------------------------------------------------------------------------------

class _Decimator:
    """FIR decimation by ``q`` of a stream (Kaiser window, 80 dB), polyphase via upfirdn.

    Output ``m`` is the full convolution at input index ``m * q``: it stands for the time
    ``(m * q - delay) / rate`` with ``delay = (len(taps) - 1) / 2`` (linear phase).
    Pass band to 0.4 x the output rate, stop band from 0.6 x: what folds lands above 0.4 x.
    """

    def __init__(self, q: int, rate_hz: float):
        self.q = q
        if q == 1:
            self.h = np.ones(1)
        else:
            out = rate_hz / q
            n, beta = signal.kaiserord(_DECIMATE_DB, 0.2 * out / (0.5 * rate_hz))
            n += (1 - n % 2)                               # odd: integer delay
            self.h = signal.firwin(n, 0.5 * out, window=("kaiser", beta), fs=rate_hz)
        self.L = len(self.h)
        self.a = -(-(self.L - 1) // q)                     # ceil((L-1)/q)
        self.delay = (self.L - 1) / 2.0
        self.buf = np.empty(0)
        self.start = 0                                     # global index of buf[0]
        self.m_next = 0
        self.n_in = 0
        self.out: list[np.ndarray] = []

    def feed(self, x: np.ndarray) -> None:
        self.n_in += len(x)
        self.buf = np.concatenate((self.buf, np.asarray(x, dtype=np.float64)))
        self._run(self.start + len(self.buf))

    def _run(self, n_end: int) -> None:
        q, a = self.q, self.a
        m_last = (n_end - 1) // q
        if m_last < self.m_next:
            return
        s = (self.m_next - a) * q                          # a multiple of q
        lo = s - self.start
        seg = self.buf[max(lo, 0):m_last * q - self.start + 1]
        if lo < 0:                                          # record start: zeros before it
            seg = np.concatenate((np.zeros(-lo), seg))
        y = signal.upfirdn(self.h, seg, 1, q)
        count = m_last - self.m_next + 1
        self.out.append(y[a:a + count])
        self.m_next = m_last + 1
        keep = (self.m_next - a) * q
        if keep > self.start:
            self.buf = self.buf[keep - self.start:]
            self.start = keep

    def finish(self, rate_hz: float) -> tuple[np.ndarray, float]:
        """The outputs whose taps lie inside the record, and the time (s) of the first one."""
        pad = int(math.ceil(self.delay)) + self.q
        self.buf = np.concatenate((self.buf, np.zeros(pad)))
        self._run(self.start + len(self.buf))
        y = np.concatenate(self.out) if self.out else np.empty(0)
        m = np.arange(len(y))
        t = (m * self.q - self.delay) / rate_hz
        half = self.delay / rate_hz
        inside = (t >= half - 1e-12) & (t <= (self.n_in - 1) / rate_hz - half + 1e-12)
        i0 = int(np.argmax(inside)) if inside.any() else 0
        y = y[inside]
        return y, float((i0 * self.q - self.delay) / rate_hz)


def _decimated(x, rate_hz: float, q: int, chunk: int) -> tuple[np.ndarray, float, int]:
    dec = _Decimator(q, rate_hz)
    for piece in iter_chunks(x, "x", chunk):
        if len(piece) and not np.isfinite(piece).all():
            raise InputError(f"x holds NaN or infinite values near sample {dec.n_in}; allowed: "
                             "finite numbers")
        dec.feed(piece)
    y, t0 = dec.finish(rate_hz)
    return y, t0, dec.n_in


# --------------------------------------------------------------------------------------------
# Ridge
# --------------------------------------------------------------------------------------------

def _viterbi(score: np.ndarray, max_jump: int, penalty: float) -> np.ndarray:
    """Path (one column per row) maximising the summed score minus penalty * (jump/max_jump)^2.

    Dynamic programming over the rows (frames), jumps limited to ``max_jump`` columns per row
    (Viterbi 1967; as used for time-frequency ridges, e.g. Carmona, Hwang & Torresani 1999).
    """
    n_t, n_f = score.shape
    back = np.zeros((n_t, n_f), dtype=np.int16)
    shifts = np.arange(-max_jump, max_jump + 1)
    # Window column i of row j holds the predecessor column j + max_jump - i, i.e. a jump
    # d = i - max_jump from it.
    cost = penalty * (shifts / max(max_jump, 1)) ** 2
    pad = np.full(n_f + 2 * max_jump, -np.inf)
    acc = score[0].copy()
    for t in range(1, n_t):
        pad[max_jump:max_jump + n_f] = acc
        cand = sliding_window_view(pad, 2 * max_jump + 1)[:, ::-1] - cost
        arg = np.argmax(cand, axis=1)
        back[t] = shifts[arg]
        acc = cand[np.arange(n_f), arg] + score[t]
    path = np.empty(n_t, dtype=np.int64)
    path[-1] = int(np.argmax(acc))
    for t in range(n_t - 1, 0, -1):
        path[t - 1] = path[t] - back[t, path[t]]
    return path


def _fixed_line_bins(q_med: np.ndarray, bins_per_lobe: int) -> np.ndarray:
    """Bins where the median power over the record stands far above the neighbouring bins."""
    width = 8 * bins_per_lobe + 1
    floor = median_filter(q_med, size=width, mode="nearest")
    peak = q_med > _FIXED_RATIO * np.maximum(floor, 1e-300)
    if not peak.any():
        return peak
    return maximum_filter1d(peak.astype(np.int8), size=2 * bins_per_lobe + 1) > 0


def _line_centres(mask: np.ndarray, q_med: np.ndarray, df: float) -> list[float]:
    """Frequency (Hz) of the strongest bin of each run of fixed-line bins (parabolic peak)."""
    out = []
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
    for a, b in zip(edges[::2], edges[1::2]):
        k = a + int(np.argmax(q_med[a:b]))
        if 0 < k < len(q_med) - 1:
            y0, y1, y2 = np.log(np.maximum(q_med[k - 1:k + 2], 1e-300))
            den = y0 - 2 * y1 + y2
            k = k + (0.5 * (y0 - y2) / den if den < 0 else 0.0)
        out.append(float(k * df))
    return out


def _harmonic_score(c: np.ndarray, cand_bins: np.ndarray, harmonics: int) -> np.ndarray:
    """Score of each candidate order frequency: weighted compressed power at its harmonics."""
    n_t, n_f = c.shape
    score = np.zeros((n_t, len(cand_bins)))
    for h in range(1, harmonics + 1):
        b = np.rint(h * cand_bins).astype(np.int64)
        ok = b < n_f
        if not ok.any():
            break
        src = c if h == 1 else maximum_filter1d(c, size=h, axis=1)
        score[:, ok] += _HARMONIC_WEIGHT ** (h - 1) * src[:, b[ok]]
    return score


def _octave_check(c: np.ndarray, cand: np.ndarray, path: np.ndarray, k: float,
                  n_harm: int) -> tuple[np.ndarray, float]:
    """Check the path against half and twice its frequency on the comb of shaft harmonics.

    If the path follows order ``k`` at ``f``, the shaft's harmonics lie at ``j f / k``
    (j = 1, 2, ...).  Over one frequency span (up to ``2 x n_harm`` times the path's
    frequency, as far as the spectrum reaches), the mean compressed power on the teeth of that
    comb, less the power midway between teeth, is compared with the combs of ``f / 2`` and
    ``2 f`` (a harmonic-sieve in the manner of Camacho & Harris's SWIPE, 2008): a comb twice
    as dense as the machine's finds half its teeth empty, and one half as dense finds the
    machine's odd orders between its teeth, so a strong half order (order 1 when order 2 is
    tracked) that fits the harmonic score as well as the order does, or a strong 2nd harmonic,
    does not hold the path.  The path moves only when another comb scores 20 % higher and lies
    (for 80 % of the frames) inside the range searched; the ridge is then found again within
    +-20 % of the moved path.  Where the wrong path sat at an end of the range (half the speed
    left the range), the moved path is wrong there too: give a range that holds the speed but
    not half of it when order ``k / 2`` is strong.
    """
    n_t, n_f = c.shape
    f = cand[path].astype(np.float64)
    top = np.minimum(2.0 * n_harm * f, n_f - 1.0)               # bins, per frame
    wide = maximum_filter1d(c, size=3, axis=1)

    def comb(ratio):
        step = ratio * f / k                                   # shaft frequency, bins
        n_teeth = int(min(96, np.max(top / np.maximum(step, 1e-9))))
        j = np.arange(1, n_teeth + 1, dtype=np.float64)
        b = j[None, :] * step[:, None]
        ok = (b <= top[:, None]) & (b >= 1)
        if not ok.any():
            return -np.inf
        bi = np.clip(np.rint(b).astype(np.int64), 0, n_f - 1)
        mid = np.clip(np.rint(b - 0.5 * step[:, None]).astype(np.int64), 0, n_f - 1)
        vals = np.take_along_axis(wide, bi, axis=1) - np.take_along_axis(c, mid, axis=1)
        return float(np.sum(np.where(ok, vals, 0.0)) / ok.sum())

    best, best_ratio = comb(1.0), 1.0
    for ratio in (0.5, 2.0):
        inside = np.mean((ratio * f >= cand[0]) & (ratio * f <= cand[-1]))
        if inside >= 0.8:
            sc = comb(ratio)
            if sc > 1.2 * best:
                best, best_ratio = sc, ratio
    if best_ratio == 1.0:
        return path, 1.0
    moved = np.clip(np.searchsorted(cand, best_ratio * f), 0, len(cand) - 1)
    return moved, best_ratio


# --------------------------------------------------------------------------------------------
# Fixed-line subtraction and demodulation
# --------------------------------------------------------------------------------------------

def _subtract_fixed_line(xd: np.ndarray, t: np.ndarray, f0: float, ridge_hz: np.ndarray,
                         half_band: float) -> tuple[np.ndarray, bool]:
    """Estimate a constant line near ``f0`` away from the ridge's crossing, and subtract it.

    The line's complex amplitude is measured in blocks (mean of ``x exp(-j 2 pi f0 t)``);
    blocks where the ridge is within ``half_band`` + 2 block bandwidths of ``f0`` are left out,
    a small frequency offset is taken from the phase advance between kept blocks, and the line
    ``A cos(2 pi (f0 + df) t + phi)`` is subtracted from the whole record.
    """
    fs = 1.0 / (t[1] - t[0])
    tb = max(8.0 / half_band, 64.0 / fs)
    nb = int(round(tb * fs))
    n_blocks = len(xd) // nb
    if n_blocks < 3:
        return xd, False
    z = (xd[:n_blocks * nb] * np.exp(-2j * np.pi * f0 * t[:n_blocks * nb])).reshape(n_blocks, nb)
    c = z.mean(axis=1)
    tc = t[:n_blocks * nb].reshape(n_blocks, nb).mean(axis=1)
    rh = ridge_hz[:n_blocks * nb].reshape(n_blocks, nb)
    near = np.abs(rh - f0).min(axis=1) < half_band + 2.0 / tb
    keep = ~near
    if keep.sum() < 3:
        return xd, False
    pairs = keep[1:] & keep[:-1]
    if pairs.any():
        rot = np.sum(c[1:][pairs] * np.conj(c[:-1][pairs]))
        dfreq = float(np.angle(rot) / (2 * np.pi * tb))
    else:
        dfreq = 0.0
    amp = np.mean(c[keep] * np.exp(-2j * np.pi * dfreq * tc[keep]))
    line = 2.0 * np.real(amp * np.exp(2j * np.pi * (f0 + dfreq) * t))
    return xd - line, True


def _lowpass_sos(cut_hz: float, fs: float, order: int = 6):
    return signal.butter(order, min(cut_hz / (0.5 * fs), 0.99), output="sos")


def _filtfilt_line_pad(sos, x: np.ndarray, n_pad: int, n_fit: int) -> np.ndarray:
    """Forward-backward filtering with each end extended by reflection about a fitted line.

    scipy's odd extension reflects about the last sample, so one noisy end sample shifts the
    whole extension; reflecting about the straight line fitted to the last ``n_fit`` samples
    keeps a linear trend exact and the noise out of the padding.
    """
    n = len(x)
    n_pad = max(1, min(n_pad, n - 1))
    n_fit = max(2, min(n_fit, n))
    i = np.arange(n, dtype=np.float64)

    def line(sl, at):
        c1 = np.polyfit(i[sl], x[sl].real, 1)
        out = np.polyval(c1, at)
        if np.iscomplexobj(x):
            out = out + 1j * np.polyval(np.polyfit(i[sl], x[sl].imag, 1), at)
        return out

    head_at = -np.arange(n_pad, 0, -1, dtype=np.float64)
    tail_at = n - 1 + np.arange(1, n_pad + 1, dtype=np.float64)
    head = 2 * line(slice(0, n_fit), head_at) - x[n_pad:0:-1]
    tail = 2 * line(slice(n - n_fit, n), tail_at) - x[-2:-n_pad - 2:-1]
    y = signal.sosfiltfilt(sos, np.concatenate((head, x, tail)), padtype=None)
    return y[n_pad:n_pad + n]


def _local_rms(r: np.ndarray, n: int) -> np.ndarray:
    return np.sqrt(np.maximum(uniform_filter1d(r * r, size=max(1, n), mode="nearest"), 0.0))


# --------------------------------------------------------------------------------------------
# Public: from the vibration
# --------------------------------------------------------------------------------------------

def speed_from_vibration(x, rate_hz: float, *, order: float, rpm_range, harmonics: int = 3,
                         bandwidth_orders: float = 0.5, window_revs: float = 8.0,
                         max_rpm_per_s: float = 2000.0, tolerance: float = VIBRATION_TOLERANCE,
                         chunk: int = CHUNK_SAMPLES) -> SpeedEstimate:
    """Speed of the reference shaft from one order's ridge in a vibration channel (no tacho).

    Parameters
    ----------
    x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The vibration channel (any units).  Streamed in chunks: memory holds the decimated
        channel only.
    rate_hz : float
        Sample rate (Hz).
    order : float
        The order (of the reference shaft) whose ridge gives the speed, > 0; usually a strong
        one, such as 1 (unbalance) or a gear mesh or blade pass order.
    rpm_range : (float, float)
        Speeds to search, rpm, 0 < lo < hi; the order's frequency must stay below 0.45 x the
        rate over it.
    harmonics : int
        Harmonics of the order (order, 2 x order, ...) scored together when choosing the ridge
        (default 3; 1 scores the order alone).
    bandwidth_orders : float
        Width (orders of the reference shaft) of the band the demodulation keeps around the
        order (default 0.5, i.e. +-0.25 orders, half the spacing of integer orders).  Its
        half-width ``B`` in Hz at the lowest speed searched (see Notes) also sets how fast a
        speed change is followed: speed changes faster than about ``B / 2`` are smoothed away.
    window_revs : float
        Length of the short-time Fourier transform windows, in revolutions at the lowest
        speed searched (default 8); shortened for fast sweeps (see Notes).
    max_rpm_per_s : float
        Fastest speed change the ridge may follow, rpm/s (default 2000).
    tolerance : float
        RMS relative speed uncertainty (a fraction, default 0.002 = 0.2 %) beyond which a
        :class:`~workbench.errors.FoldlineWarning` says so.
    chunk : int
        Samples per chunk when ``x`` is one array.

    Returns
    -------
    SpeedEstimate
        ``source`` "vibration".  Time grid at about 4 x the demodulation band's half-width in
        Hz, covering the record.

    Raises
    ------
    InputError
        Bad arguments; a record shorter than two analysis windows; an order above 0.45 x the
        rate at the top of the range; a speed falling to zero (the angle cannot be built).

    Warns
    -----
    FoldlineWarning
        When the speed uncertainty exceeds ``tolerance``; when fixed lines were found and
        subtracted (listed in the log only).

    Notes
    -----
    **Ridge.**  The channel is decimated to at least 2.5 x the highest frequency scored
    (``harmonics x order`` at the top speed).  The STFT window is ``window_revs`` revolutions
    at the lowest speed, shortened to ``1 / sqrt(sweep)`` when the average sweep of the order
    over the record (``order x (hi - lo) / 60 / duration``, Hz/s) would smear it over more than
    one bin, but not below 2 revolutions; Hann window, hop a quarter window.  Powers are divided
    by each frame's median over the band (the noise floor).  Bins whose median power over the
    record stands 10 dB above their neighbours hold lines of constant frequency; they are
    divided by their own median over time, so a fixed line does not hold the ridge while the
    order moves.  The score of a candidate order frequency ``f`` is ``sum_h w^(h-1)
    min(max(ln P(h f), 0), 8)`` over ``h = 1 .. harmonics`` (subharmonic summation, Hermes
    1988, ``w = 0.84``): a 2nd harmonic stronger than the order still scores the order's
    frequency highest (it collects the order and the harmonic), and a lone line is read as the
    order rather than as a harmonic of half the speed.  The path through the frames is the one
    of highest total score minus a quadratic penalty on each jump (jumps limited to
    ``max_rpm_per_s``), found by dynamic programming (Viterbi).  The path is found without
    and with the fixed lines flattened: the flattened one is kept when the other moves (the
    speed varies), or when it moves and scores at least half as high (an order moving beside
    a strong fixed line that held the other); otherwise the speed is taken as constant, where
    an order cannot be told from a fixed line by its motion, and fixed lines are kept.

    **Demodulation.**  The band's half-width ``B`` (Hz) is ``bandwidth_orders / 2`` orders at
    the lowest speed searched, widened to the STFT's resolution (so the coarse ridge lies
    inside it) but kept under 0.45 orders there.  Each fixed line within reach of the band (of
    the order or of a harmonic) is measured away from the times the ridge crosses it and
    subtracted.  The decimated channel is multiplied by ``exp(-j phi_r(t))`` (``phi_r`` the
    ridge's phase), low-passed (6th-order Butterworth at ``B``, forward-backward, each end
    padded by reflection about a fitted line) and decimated to about ``8 B``; the order's phase
    is ``phi_r`` plus the unwrapped phase of that analytic component, and the speed is its
    slope divided by ``2 pi order``.  This is the ridge-following band-pass and phase
    demodulation of Urbanek, Barszcz & Antoni (2013) and Combet & Gelman (2007), done as a
    heterodyne; Bonnardot et al. (2005) phase-demodulate a mesh harmonic the same way.  The
    first pass follows the STFT ridge with the order alone; the second follows the first
    pass's speed with the order and each harmonic scored, and combines their speeds point by
    point with weights 1 / uncertainty^2 (several orders against one speed, as in Leclere et
    al. 2016).  Each speed is smoothed by a cubic Savitzky-Golay filter of ``5 / B`` seconds
    (cut-off about ``B / 2``; Schafer 2011), which fits the ends instead of padding them.  The
    first and last ``1 / B`` seconds, where the filters see one side only, are left out.

    **Uncertainty.**  Additive noise makes the demodulated phase noisy over the band, so its
    slope has a noise spectrum rising with frequency squared up to the band edge ``B``.  The
    true speed of a run-up holds nothing between ``B/2`` and ``B``: the residual between the
    demodulated speed and the smoothed one (content above ``B/2``) is noise, and the noise left
    below ``B/2`` is 1/7 of its variance (the integral of ``f^2`` over ``[0, B/2]`` against
    ``[B/2, B]``).  Per point: the local RMS of that residual (over 4 / B seconds) / sqrt(7),
    relative to the speed; over the record, the RMS of those; combined over the harmonics as
    ``1 / sqrt(sum(1 / u_h^2))``.  It covers noise and leftover interference; a ridge captured
    by another line is not covered (check the ridge against the order map), and in the first
    and last second of a fast sweep the error can reach about twice the figure.

    References
    ----------
    .. [1] F. Bonnardot, M. El Badaoui, R. B. Randall, J. Daniere and F. Guillet, "Use of the
       acceleration signal of a gearbox in order to perform angular resampling (with limited
       speed fluctuation)", Mechanical Systems and Signal Processing 19(4):766-785, 2005.
    .. [2] F. Combet and L. Gelman, "An automated methodology for performing time synchronous
       averaging of a gearbox signal without speed sensor", Mechanical Systems and Signal
       Processing 21(6):2590-2606, 2007.
    .. [3] J. Urbanek, T. Barszcz and J. Antoni, "A two-step procedure for estimation of
       instantaneous rotational speed with large fluctuations", Mechanical Systems and Signal
       Processing 38(1):96-102, 2013.
    .. [4] Q. Leclere, H. Andre and J. Antoni, "A multi-order probabilistic approach for
       instantaneous angular speed tracking debriefing of the CMMNO'14 diagnosis contest",
       Mechanical Systems and Signal Processing 81:375-386, 2016 (scoring several orders
       together against the speed).
    .. [5] D. J. Hermes, "Measurement of pitch by subharmonic summation", Journal of the
       Acoustical Society of America 83(1):257-264, 1988.
    .. [6] A. J. Viterbi, "Error bounds for convolutional codes and an asymptotically optimum
       decoding algorithm", IEEE Transactions on Information Theory 13(2):260-269, 1967.
    .. [7] R. A. Carmona, W. L. Hwang and B. Torresani, "Multiridge detection and time-frequency
       reconstruction", IEEE Transactions on Signal Processing 47(2):480-492, 1999.
    .. [8] R. W. Schafer, "What is a Savitzky-Golay filter?", IEEE Signal Processing Magazine
       28(4):111-117, 2011.

    Examples
    --------
    >>> import numpy as np
    >>> rate = 2048.0
    >>> t = np.arange(int(20 * rate)) / rate
    >>> revs = 20.0 * t + 0.5 * t ** 2                    # 1200 -> 2400 rpm in 20 s
    >>> x = np.cos(2 * np.pi * revs) + 0.5 * np.cos(4 * np.pi * revs)
    >>> est = speed_from_vibration(x, rate, order=1, rpm_range=(900, 3000))
    >>> bool(abs(est.angle.rpm_at(10.0) / 1800.0 - 1) < 1e-3)
    True
    """
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    k = checks.real(None, "order", order)
    if k <= 0:
        raise InputError(f"order = {show(order)}: must be an order > 0")
    lo, hi = _rpm_range(rpm_range)
    n_harm = checks.positive_int(None, "harmonics", harmonics, whole_float=False)
    bw = checks.real(None, "bandwidth_orders", bandwidth_orders)
    if not 0 < bw <= 2 * k:
        raise InputError(f"bandwidth_orders = {show(bandwidth_orders)}: must be 0 < "
                         f"bandwidth_orders <= 2 x order ({2 * k:g})")
    wr = checks.real(None, "window_revs", window_revs)
    if wr < 1:
        raise InputError(f"window_revs = {show(window_revs)}: must be >= 1 revolution")
    mx = checks.real(None, "max_rpm_per_s", max_rpm_per_s)
    if mx <= 0:
        raise InputError(f"max_rpm_per_s = {show(max_rpm_per_s)}: must be > 0 rpm/s")
    tol = checks.real(None, "tolerance", tolerance)
    if tol <= 0:
        raise InputError(f"tolerance = {show(tolerance)}: must be a fraction > 0")
    f1_lo, f1_hi = lo / 60.0, hi / 60.0
    fk_hi = k * f1_hi
    if fk_hi >= 0.45 * rate:
        raise InputError(f"order {k:g} at {hi:g} rpm is at {fk_hi:g} Hz, above 0.45 x the rate "
                         f"({0.45 * rate:g} Hz); allowed: a lower order or top speed (or a "
                         "record at a higher rate)")
    half_band = 0.5 * bw * f1_lo                           # Hz, demodulation half-width
    f_top = min(n_harm * fk_hi + half_band, 0.45 * rate)
    f_top = max(f_top, fk_hi + half_band)
    q = max(1, int(rate // (_OVERSAMPLE * f_top)))
    xd, t0, n_in = _decimated(x, rate, q, int(chunk))
    fs = rate / q
    duration = (n_in - 1) / rate if n_in > 1 else 0.0
    log = [f"decimated by {q} to {fs:g} Hz"]

    # ---- short-time Fourier transform ---------------------------------------------------
    win_s = wr / f1_lo
    sweep = k * (f1_hi - f1_lo) / max(duration, 1e-9)
    if sweep > 0:
        win_s = min(win_s, max(1.0 / math.sqrt(sweep), 2.0 / f1_lo))
    nper = max(16, int(round(win_s * fs)))
    if len(xd) < 2 * nper:
        raise InputError(f"the record ({duration:.3g} s) is too short to follow order {k:g}: "
                         f"allowed: at least two analysis windows of {nper / fs:.3g} s "
                         f"({wr:g} revolutions at {lo:g} rpm); lower window_revs or the "
                         "bottom of the rpm range")
    nfft = 1 << int(math.ceil(math.log2(2 * nper)))
    hop = max(1, nper // 4)
    frames = sliding_window_view(xd, nper)[::hop]
    n_t = len(frames)
    win = signal.get_window("hann", nper)
    # Frequencies up to f_top (bins beyond are never read).
    df = fs / nfft
    n_keep = min(nfft // 2 + 1, int(math.ceil(f_top / df)) + 2)
    power = np.empty((n_t, n_keep))
    step = 512
    for i in range(0, n_t, step):
        spec = np.fft.rfft(frames[i:i + step] * win, nfft, axis=1)[:, :n_keep]
        power[i:i + step] = spec.real ** 2 + spec.imag ** 2
    t_frames = t0 + (np.arange(n_t) * hop + 0.5 * (nper - 1)) / fs
    band_lo = max(1, int(k * f1_lo / df * 0.5))
    # Noise floor: the frame's median over the band, but at most 50 dB under its strongest
    # bin (a clean record has no noise floor to speak of).
    floor = np.maximum(np.median(power[:, band_lo:], axis=1, keepdims=True),
                       1e-5 * power[:, band_lo:].max(axis=1, keepdims=True))
    qn = power / np.maximum(floor, 1e-300)
    lobe = max(1, int(round(2 * nfft / nper)))
    q_med = np.median(qn, axis=0)
    fixed = _fixed_line_bins(q_med, lobe) if n_t >= 8 else np.zeros(n_keep, bool)
    fixed[:band_lo] = False
    fixed_hz = _line_centres(fixed, q_med, df)
    cand = np.arange(int(math.floor(k * f1_lo / df)), int(math.ceil(fk_hi / df)) + 1)
    cand = cand[(cand >= 1) & (cand < n_keep)]
    max_jump = max(1, int(math.ceil(k * mx / 60.0 * hop / fs / df)))

    def path_for(qq):
        c = np.clip(np.log(np.maximum(qq, 1e-300)), 0.0, _SCORE_CAP)
        score = _harmonic_score(c, cand.astype(np.float64), n_harm)
        p = _viterbi(score, max_jump, _JUMP_PENALTY)
        moved, ratio = _octave_check(c, cand, p, k, n_harm)
        if ratio != 1.0:
            near = np.abs(cand[None, :] - cand[moved][:, None]) <= np.maximum(
                0.2 * cand[moved][:, None], 3)
            p = _viterbi(np.where(near, score, score - 100.0), max_jump, _JUMP_PENALTY)
            log.append(f"ridge moved to {ratio:g} x its frequency: the shaft's harmonics fit "
                       "there better")
        return p, float(np.median(score[np.arange(n_t), p]))

    moving = True
    path, quality = path_for(qn)
    if fixed.any():
        flat = qn.copy()
        flat[:, fixed] /= np.maximum(q_med[fixed], 1e-300)
        path_f, quality_f = path_for(flat)
        span = int(np.ptp(cand[path])) > 2 * lobe
        span_f = int(np.ptp(cand[path_f])) > 2 * lobe
        if span or (span_f and quality_f >= _FLAT_SHARE * quality):
            path, quality = path_f, quality_f
        else:
            moving = False
            log.append(f"order {k:g} keeps a constant frequency: speed taken as constant, "
                       "lines of constant frequency kept")
    bins = cand[path].astype(np.float64)
    # Parabolic refinement of the ridge on the log power (Quinn-style peak interpolation).
    ii = cand[path]
    ok = (ii > 0) & (ii < n_keep - 1)
    rows = np.arange(n_t)[ok]
    y0 = np.log(np.maximum(power[rows, ii[ok] - 1], 1e-300))
    y1 = np.log(np.maximum(power[rows, ii[ok]], 1e-300))
    y2 = np.log(np.maximum(power[rows, ii[ok] + 1], 1e-300))
    den = y0 - 2 * y1 + y2
    with np.errstate(divide="ignore", invalid="ignore"):
        shift = np.where(den < 0, 0.5 * (y0 - y2) / den, 0.0)
    bins[ok] += np.clip(shift, -0.5, 0.5)
    ridge_hz_frames = bins * df
    log.append(f"ridge of order {k:g}: STFT window {nper / fs:.3g} s, {n_t} frames, median "
               f"score {quality:.3g}")

    # ---- demodulation along the ridge -----------------------------------------------------
    t = t0 + np.arange(len(xd)) / fs
    # Beyond the first and last frame centres, the ridge is extended along its end slopes.
    ridge_hz = np.clip(_interp_ends(t, t_frames, ridge_hz_frames), 0.5 * k * f1_lo,
                       1.5 * fk_hi)
    half_band = min(max(half_band, 1.0 / win_s), 0.45 * f1_lo)
    harm = [h for h in range(1, n_harm + 1) if h * (fk_hi + half_band) < 0.45 * fs] or [1]
    used = []
    if moving and fixed_hz:
        for f0 in fixed_hz:
            for h in harm:
                reach_lo = h * ridge_hz.min() - 2 * half_band
                reach_hi = h * ridge_hz.max() + 2 * half_band
                if reach_lo <= f0 <= reach_hi:
                    xd, done = _subtract_fixed_line(xd, t, f0, h * ridge_hz, half_band)
                    if done:
                        used.append(f0)
                    break
        if used:
            log.append("fixed lines subtracted near the ridge: " +
                       ", ".join(f"{f:.4g} Hz" for f in used))
    q2 = max(1, int(fs // (8 * half_band)))
    # Pass 1 follows the STFT ridge with the order alone; pass 2 follows pass 1's speed with
    # every harmonic, and combines them (inverse-variance weights, the multi-order idea of
    # Leclere et al. 2016).
    tb, rpm, u_rel, _ = _demodulate(xd, t, fs, ridge_hz, k, half_band, q2)
    ridge2 = np.clip(_interp_ends(t, tb, rpm), 0.5 * lo, 1.5 * hi) * (k / 60.0)
    parts = [_demodulate(xd, t, fs, h * ridge2, h * k, half_band, q2) for h in harm]
    w = np.array([1.0 / np.maximum(p[2], 1e-12) ** 2 for p in parts])
    w_sum = w.sum(axis=0)
    rpm = np.sum(w * np.array([p[1] for p in parts]), axis=0) / w_sum
    u_rel = 1.0 / np.sqrt(w_sum)
    share = ", ".join(f"order {h * k:g}: {100 * float(np.mean(wi / w_sum)):.0f} %"
                      for h, wi in zip(harm, w))
    overall = float(np.sqrt(np.mean(u_rel ** 2)))
    angle = _shaft_angle(tb, rpm, f"vibration (order {k:g})")
    method = (f"order {k:g} ridge ({lo:g}-{hi:g} rpm searched, {n_harm} harmonics scored) "
              f"refined by phase demodulation in a +-{half_band:.3g} Hz band")
    log.append(f"phase demodulation +-{half_band:.3g} Hz; weights {share}")
    log.append(f"speed from order {k:g}: {rpm.min():.1f}-{rpm.max():.1f} rpm, uncertainty "
               f"{100 * overall:.3g} % RMS")
    _warn_if_uncertain(overall, tol, f"vibration (order {k:g})")
    return SpeedEstimate(tb, rpm, u_rel, overall, "vibration", method, angle,
                         fixed_lines_hz=tuple(fixed_hz), ridge_time_s=t_frames,
                         ridge_rpm=ridge_hz_frames / k * 60.0, log=tuple(log))


def _demodulate(xd, t, fs, ridge_hz, k, half_band, q2):
    """Phase demodulation of order ``k`` along ``ridge_hz``: times, rpm, uncertainty, raw rpm.

    See :func:`speed_from_vibration` (Notes) for the method and the uncertainty.
    """
    phase_r = 2 * np.pi * (np.cumsum(ridge_hz) - ridge_hz[0]) / fs
    z = xd * np.exp(-1j * phase_r)
    z = _filtfilt_line_pad(_lowpass_sos(half_band, fs), z, int(8 * fs / half_band),
                           int(0.5 * fs / half_band))
    zb = z[::q2]
    tb = t[::q2]
    fsb = fs / q2
    theta = phase_r[::q2] + np.unwrap(np.angle(zb))
    # The filters have data on one side only near the record's ends: 1 / half_band seconds
    # at each end are left out.
    trim = int(math.ceil(fsb / half_band))
    if len(theta) > 4 * trim + 8:
        theta, tb = theta[trim:-trim], tb[trim:-trim]
    rpm_raw = np.gradient(theta, 1.0 / fsb) / (2 * np.pi * k) * 60.0
    # Savitzky-Golay (cubic, cut-off about half_band / 2; Schafer 2011): at the ends it
    # fits the polynomial to the last window instead of padding.
    half = max(3, int(round(2.5 * fsb / half_band)))
    rpm = signal.savgol_filter(rpm_raw, min(2 * half + 1, len(rpm_raw) - (1 - len(rpm_raw) % 2)),
                               3, mode="interp")
    resid = rpm_raw - rpm
    u = _local_rms(resid, int(round(4.0 / half_band * fsb))) / math.sqrt(7.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        u_rel = np.where(rpm > 0, u / np.abs(rpm), np.inf)
    return tb, rpm, u_rel, rpm_raw


def _interp_ends(t, tp, fp, n_end: int = 4) -> np.ndarray:
    """np.interp inside ``tp``; beyond its ends, the straight line through the end points."""
    out = np.interp(t, tp, fp)
    n = min(n_end, len(tp))
    if n >= 2:
        for sel, side in ((t < tp[0], slice(0, n)), (t > tp[-1], slice(len(tp) - n, len(tp)))):
            if sel.any():
                a1, a0 = np.polyfit(tp[side], fp[side], 1)
                out[sel] = a0 + a1 * t[sel]
    return out


def _rpm_range(rpm_range) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in rpm_range)
    except (TypeError, ValueError):
        raise InputError(f"rpm_range = {show(rpm_range)}: must be two speeds LO, HI in "
                         "rpm with 0 < LO < HI") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise InputError(f"rpm_range = [{lo:g}, {hi:g}]: must be 0 < LO < HI (rpm)")
    return lo, hi


# --------------------------------------------------------------------------------------------
# Public: from an analogue speed channel
# --------------------------------------------------------------------------------------------

def speed_from_channel(x, rate_hz: float, *, scale: float, offset: float = 0.0,
                       bandwidth_hz: float = 10.0, tolerance: float = CHANNEL_TOLERANCE,
                       chunk: int = CHUNK_SAMPLES) -> SpeedEstimate:
    """Speed of the reference shaft from an analogue speed channel (a drive's rpm output).

    Parameters
    ----------
    x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The speed channel, in its own units (volts, mA, ...).  Streamed in chunks.
    rate_hz : float
        Sample rate (Hz).
    scale : float
        rpm per unit of the channel (e.g. 600 for a 0-10 V output spanning 0-6000 rpm), != 0.
    offset : float
        rpm at 0 units (default 0): rpm = offset + scale x channel.
    bandwidth_hz : float
        Speed changes faster than this are smoothed away (Hz, default 10: a shaft's inertia
        keeps its speed from changing faster, and a drive's analogue output is usually updated
        and filtered more slowly).  The channel is decimated with a linear-phase FIR (Kaiser,
        80 dB) to about 20 x ``bandwidth_hz`` and low-passed at ``bandwidth_hz`` forward and
        backward (4th-order Butterworth, no phase shift; each end padded by reflection about
        a fitted line, so a ramp passes unchanged).  The first and last ``0.6 /
        bandwidth_hz`` s or so (where the FIR's taps would leave the record) are left out.
    tolerance : float
        RMS relative uncertainty (a fraction, default 0.002) beyond which a warning says so.
    chunk : int
        Samples per chunk when ``x`` is one array.

    Returns
    -------
    SpeedEstimate
        ``source`` "channel", on a time grid at the decimated rate.

    Notes
    -----
    **Uncertainty.**  The residual between the decimated channel and the smoothed speed is
    the channel's noise between ``bandwidth_hz`` and the decimated Nyquist frequency (a
    shaft's speed holds nothing there).  Taking the noise as white, the part left below
    ``bandwidth_hz`` has ``bandwidth_hz / (fs/2 - bandwidth_hz)`` times its variance.  Per
    point: the local RMS over 1 s, scaled so, relative to the speed.  Calibration errors of the
    drive's output (its scale and offset) are not seen in the data and are not included.

    References
    ----------
    .. [1] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
       function", Proc. IEEE International Symposium on Circuits and Systems, 20-23, 1974.
    .. [2] S. Butterworth, "On the theory of filter amplifiers", Experimental Wireless and the
       Wireless Engineer 7:536-541, 1930.

    Examples
    --------
    >>> import numpy as np
    >>> rate = 1000.0
    >>> t = np.arange(int(10 * rate)) / rate
    >>> volts = (1200.0 + 60.0 * t) / 600.0                # 600 rpm per volt
    >>> est = speed_from_channel(volts, rate, scale=600.0)
    >>> round(float(est.angle.rpm_at(5.0)), 3)
    1500.0
    """
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    s = checks.real(None, "scale", scale)
    if s == 0:
        raise InputError("scale = 0: must be the channel's rpm per unit, != 0")
    off = checks.real(None, "offset", offset)
    bwh = checks.positive(None, "bandwidth_hz", bandwidth_hz, unit="Hz")
    tol = checks.real(None, "tolerance", tolerance)
    if tol <= 0:
        raise InputError(f"tolerance = {show(tolerance)}: must be a fraction > 0")
    if bwh >= 0.4 * rate:
        bwh = 0.4 * rate * 0.5
    # Decimated to 20 x bandwidth_hz: the FIR stays short (its taps reach about 0.6 /
    # bandwidth_hz s; outputs whose taps leave the record are dropped).
    q = max(1, int(rate // (20.0 * bwh)))
    xd, t0, n_in = _decimated(x, rate, q, int(chunk))
    fs = rate / q
    if len(xd) < 8:
        raise InputError(f"the speed channel holds {n_in} samples; allowed: at least "
                         f"{8 * q} at {rate:g} Hz")
    raw = off + s * xd
    rpm = _filtfilt_line_pad(_lowpass_sos(bwh, fs, order=4), raw, int(8 * fs / bwh),
                             int(fs / bwh))
    t = t0 + np.arange(len(xd)) / fs
    resid = raw - rpm
    white = bwh / max(0.5 * fs - bwh, bwh)
    u = _local_rms(resid, int(round(fs))) * math.sqrt(white)
    with np.errstate(divide="ignore", invalid="ignore"):
        u_rel = np.where(rpm > 0, u / np.abs(rpm), np.inf)
    overall = float(np.sqrt(np.mean(u_rel ** 2)))
    angle = _shaft_angle(t, rpm, "speed channel")
    method = (f"analogue speed channel x {s:g} rpm per unit" + (f" + {off:g} rpm" if off else "")
              + f", low-passed at {bwh:g} Hz")
    log = [f"{method}: {rpm.min():.1f}-{rpm.max():.1f} rpm, uncertainty {100 * overall:.3g} % RMS"]
    _warn_if_uncertain(overall, tol, "speed channel")
    return SpeedEstimate(t, rpm, u_rel, overall, "channel", method, angle, log=tuple(log))
