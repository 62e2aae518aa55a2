"""Computed order tracking: resample a vibration channel at constant shaft-angle increments.

Design (alias-protected, streaming, one or several cores, one or many channels)
---------------------------------------------
Resampling a time signal at ``samples_per_rev`` points per revolution is a rate change that
follows the speed.  Where ``samples_per_rev x speed`` is below the sample rate it decimates,
so anything above the *order Nyquist* (``samples_per_rev / 2`` orders) would fold into the
order spectrum.  The tracker works block by block (overlap-save, about 131,072 samples each):

1. **Speed-tracking low-pass in time** (alias protection).  For each block the speed range
   ``[f_lo, f_hi]`` over the block (plus a quarter filter length each side) is read from the
   :class:`ShaftAngle`.  A linear-phase Kaiser-window FIR low-pass (100 dB stopband, 1e-5
   passband ripple; Kaiser 1974) is designed with its stopband starting at the order Nyquist
   at the block's *lowest* speed, ``samples_per_rev / 2 x f_lo``, and its passband reaching
   ``max_order x f_hi``; it is applied by FFT.  Nothing above the order Nyquist survives at any
   instant of the block, and every order up to ``max_order`` passes with 1e-5 ripple.  Blocks
   are shortened where the speed changes too fast for both to hold; if even a short block
   cannot, the passband is narrowed (a warning says where and to which order).  Where the
   order Nyquist exceeds the time Nyquist no protection is needed; a fixed low-pass from
   0.45 x rate to 0.5 x rate then only keeps the block band-limited.
2. **Band-limited interpolation at the angle instants.**  In the same FFT the spectrum is
   resized (zero-padded or truncated: exact resampling of the band-limited block) so the
   block sits on a grid at least 6.7 x finer than its highest remaining frequency, and divided
   by the quintic B-spline's sampled spectrum; the quintic cardinal spline through that grid
   is then evaluated at the angle instants (six taps per output, with the closed-form
   quintic B-spline weights of Thevenaz, Blu and Unser 2000, in numpy: the same values as
   ``scipy.ndimage.map_coordinates(..., order=5, prefilter=False)`` to rounding, but the GIL
   is released so blocks can run on several cores).
   Measured: a tone in the passband is reproduced within -95 dB (images and pass-band error
   together; Unser 1999); no folding happens because the content lies below the angle grid's
   Nyquist.
3. **Angle instants.**  Times of the angle grid come from the shaft-angle fit: exact inverse
   every 1/8 rev, cubic Hermite in between (see :meth:`ShaftAngle._grid_times`).

Compared with the textbook scheme (oversample the angle grid by L, filter in the order domain,
decimate by L), this evaluates the interpolator once per *output* sample instead of L times,
and does all sharp filtering in the FFT, which is what makes about 300 x real time on one core
possible (``bench/bench_tracking.py``).  Its limit is the speed change within one filter
length (about ``80 / samples_per_rev`` revolutions): the full passband is kept while the
acceleration stays below about ``0.05 f^2`` at 64 samples/rev and ``0.3 f^2`` at 256 (f in
rev/s, acceleration in rev/s^2; e.g. 1800 rpm/s at 600 rpm and 256 samples/rev), measured on
the block planner.  Beyond it the passband narrows with a warning; the protection holds.

Usable order range: the passband ends at ``max_order`` (default 0.8 x order Nyquist,
``samples_per_rev / 2.5``; the analyser convention ``samples_per_rev / 2.56`` lies inside it);
between ``max_order`` and the order Nyquist lies the filter's transition band, where levels are
attenuated partly.  Samples within about ``80 / samples_per_rev`` revolutions of the record's
ends see the filter's start-up (the record is taken as zero outside it).

Many channels against one tacho: feed 2-D chunks (channels x samples).  The block plan (speed
range, filter design, FFT sizes, angle instants, interpolation taps and weights) depends only on
the shaft angle and the rate, so it is made once per block and applied to every channel; each
channel's result is the same as tracking it alone.  With ``threads > 1`` consecutive blocks are
filtered and interpolated on a small thread pool (the FFTs and the numpy array work release the
GIL); every block is computed by the same code whatever the thread, so the result is
identical to the serial one.

``protect=False`` skips the speed-tracking low-pass: the record is interpolated (band-limited,
as in step 2) straight onto the target grid, so content above the order Nyquist folds, exactly
as a plain resampler would let it.

References
----------
.. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking", Mechanical Systems
   and Signal Processing 11(2):187-205, 1997.
.. [2] J. R. Potter and M. Gribler, "Computed order tracking obsoletes older methods", SAE
   Technical Paper 891131, 1989.
.. [3] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window function",
   Proc. IEEE International Symposium on Circuits and Systems, 20-23, 1974.
.. [4] J. O. Smith and P. Gossett, "A flexible sampling-rate conversion method", Proc. IEEE
   ICASSP 9:112-115, 1984 (band-limited interpolation at arbitrary instants).
.. [5] M. Unser, "Splines: a perfect fit for signal and image processing", IEEE Signal
   Processing Magazine 16(6):22-38, 1999 (cardinal spline interpolation and its prefilter).
.. [6] A. V. Oppenheim and R. W. Schafer, "Discrete-Time Signal Processing", Prentice Hall,
   1989 (overlap-save block convolution; Kaiser window design formulas, section 7.4).
.. [7] P. Thevenaz, T. Blu and M. Unser, "Interpolation revisited", IEEE Transactions on
   Medical Imaging 19(7):739-758, 2000 (closed-form B-spline weights).
"""

from __future__ import annotations

import math
import os
import warnings
from collections import deque
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

from workbench import checks
from workbench.checks import show
from workbench.angle._common import CHUNK_SAMPLES, iter_chunks, one_d
from workbench.angle.shaft_angle import ShaftAngle
from workbench.errors import FoldlineWarning, InputError

__all__ = ["AngleSignal", "OrderTracker", "resample_to_angle", "iter_resample_to_angle",
           "iter_resample_to_angle_channels", "kaiser_lowpass", "resolve_threads",
           "PROTECTION_DB", "DEFAULT_MAX_ORDER_FRACTION"]

#: Stopband attenuation and passband ripple (as -20 log10) of the alias-protection low-pass, dB.
PROTECTION_DB = 100.0
#: Default passband edge (``max_order``) as a fraction of the order Nyquist.
DEFAULT_MAX_ORDER_FRACTION = 0.8

_Q = 64                  # filter-edge grid: steps per octave (designs are cached on it)
_SLACK = 0.02            # edges designed 2 % beyond need, so one design serves several blocks
_CONTENT_FRACTION = 0.15   # highest content / interpolation-grid rate (6.7 x oversampled)
_SPLINE_GUARD = 28       # interpolation-grid samples kept clear of each block edge
_RAW_PASS = 0.45         # passband edge (fraction of the rate) of the time-Nyquist low-pass
_N_MAX = (1 << 20) + 1   # longest low-pass (taps)
_NFFT0 = 1 << 17         # default FFT block


@dataclass(frozen=True, eq=False)
class AngleSignal:
    """A signal sampled at constant shaft-angle increments.

    Attributes
    ----------
    data : ndarray, shape (n,)
        Samples (the channel's units); sample ``i`` is at shaft angle
        ``revs_start + i / samples_per_rev`` revolutions.
    samples_per_rev : int
        Samples per revolution of the reference shaft.
    revs_start : float
        Shaft angle of the first sample (revolutions); a multiple of ``1 / samples_per_rev``.
    rpm : ndarray, shape (n,)
        Shaft speed at each sample (rpm).
    log : tuple of str
        What was done to produce it.
    """

    data: np.ndarray
    samples_per_rev: int
    revs_start: float
    rpm: np.ndarray
    log: tuple[str, ...] = ()

    def __post_init__(self):
        d = np.asarray(self.data, dtype=np.float64)
        r = np.asarray(self.rpm, dtype=np.float64)
        if d.ndim != 1 or r.shape != d.shape:
            raise InputError(f"AngleSignal: data has shape {d.shape} and rpm {r.shape}; allowed: "
                             "two 1-D arrays of the same length")
        checks.positive_int(None, "AngleSignal: samples_per_rev", self.samples_per_rev, whole_float=False)
        checks.real(None, "AngleSignal: revs_start", self.revs_start)
        object.__setattr__(self, "data", d)
        object.__setattr__(self, "rpm", r)
        object.__setattr__(self, "samples_per_rev", int(self.samples_per_rev))
        object.__setattr__(self, "revs_start", float(self.revs_start))
        object.__setattr__(self, "log", tuple(self.log))

    @property
    def n_samples(self) -> int:
        """Number of samples."""
        return len(self.data)

    @property
    def revs(self) -> np.ndarray:
        """Shaft angle of each sample (revolutions), shape (n,)."""
        return self.revs_start + np.arange(len(self.data)) / self.samples_per_rev

    @property
    def revolutions(self) -> float:
        """Revolutions covered (n / samples_per_rev)."""
        return len(self.data) / self.samples_per_rev

    @property
    def order_nyquist(self) -> float:
        """Highest order the angle grid can hold: samples_per_rev / 2."""
        return self.samples_per_rev / 2.0

    @classmethod
    def concatenate(cls, pieces, log: tuple[str, ...] = ()) -> AngleSignal:
        """Join consecutive pieces (as yielded by :class:`OrderTracker`) into one signal."""
        pieces = list(pieces)
        if not pieces:
            raise InputError("no angle-domain samples to join")
        spr = pieces[0].samples_per_rev
        for a, b in zip(pieces[:-1], pieces[1:]):
            expect = a.revs_start + a.n_samples / spr
            if b.samples_per_rev != spr or abs(b.revs_start - expect) * spr > 1e-6:
                raise InputError(f"angle pieces are not consecutive: one ends at {expect:.6f} "
                                 f"rev, the next starts at {b.revs_start:.6f} rev")
        return cls(np.concatenate([p.data for p in pieces]), spr, pieces[0].revs_start,
                   np.concatenate([p.rpm for p in pieces]), log)


def _bspline5_spectrum(nu: np.ndarray) -> np.ndarray:
    """Spectrum of the quintic B-spline sampled at the integers (Unser 1999), at nu cycles/sample."""
    w = 2 * np.pi * nu
    return (66.0 + 52.0 * np.cos(w) + 2.0 * np.cos(2 * w)) / 120.0


def resolve_threads(threads, name: str = "threads") -> int:
    """Threads to use: ``None`` gives the machine's cores (``os.cpu_count()``), else an int >= 1."""
    if threads is None:
        return max(1, os.cpu_count() or 1)
    return checks.positive_int(None, name, threads, whole_float=False)


def kaiser_lowpass(n_taps: int, cutoff_hz: float, rate_hz: float, beta: float) -> np.ndarray:
    """Linear-phase FIR low-pass by the window method with a Kaiser window, unit gain at DC.

    Parameters
    ----------
    n_taps : int
        Filter length (odd for a type I filter).
    cutoff_hz : float
        Cut-off (the ideal low-pass's edge, middle of the transition band), Hz.
    rate_hz : float
        Sample rate, Hz.
    beta : float
        Kaiser window shape parameter (``0.1102 (A - 8.7)`` for a stopband of A > 50 dB).

    Returns
    -------
    ndarray, shape (n_taps,)
        The taps, scaled so that they sum to 1 (the same filter as ``scipy.signal.firwin(
        n_taps, cutoff_hz, window=("kaiser", beta), fs=rate_hz)``).

    References
    ----------
    .. [1] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
       function", Proc. IEEE International Symposium on Circuits and Systems, 20-23, 1974.
    .. [2] A. V. Oppenheim and R. W. Schafer, "Discrete-Time Signal Processing", Prentice
       Hall, 1989, section 7.4.
    """
    fc = 2.0 * cutoff_hz / rate_hz                     # cut-off as a fraction of Nyquist
    m = np.arange(n_taps) - 0.5 * (n_taps - 1)
    h = fc * np.sinc(fc * m) * np.kaiser(n_taps, beta)
    return h / h.sum()


# The quintic B-spline weights in closed form (Thevenaz, Blu and Unser 2000), single pass.
def _quintic_weights(u: np.ndarray) -> tuple[np.ndarray, ...]:
    """Weights of samples i-2 .. i+3 for the quintic B-spline at ``i + u``, 0 <= u < 1."""
    w = u.copy()
    w2 = w * w
    w5 = w * w2
    w5 *= w2
    w5 *= 1.0 / 120.0
    w2 -= w
    w4 = w2 * w2
    w -= 0.5
    t = w2 - 3.0
    t *= w2
    w0 = w2 + w4
    w0 += 0.2
    w0 *= 1.0 / 24.0
    w0 -= w5
    t0 = w2 - 5.0
    t0 *= w2
    t0 += 46.0 / 5.0
    t0 *= 1.0 / 24.0
    t1 = t + 4.0
    t1 *= w
    t1 *= -1.0 / 12.0
    w2_, w3_ = t0 + t1, t0 - t1
    t0 = 1.8 - t
    t0 *= 1.0 / 16.0
    t1 = w4 - w2
    t1 -= 5.0
    t1 *= w
    t1 *= 1.0 / 24.0
    return w0, t0 + t1, w2_, w3_, t0 - t1, w5


def _quintic_eval(y: np.ndarray, base: np.ndarray, weights) -> np.ndarray:
    """Quintic cardinal-spline value sum_j w_j y[base + j], j = 0..5 (``y`` the B-spline
    coefficients, 1-D); summed in the precision of ``y`` and ``weights`` (single precision in
    the tracker, like its FFTs), returned as float64."""
    dt = np.result_type(y.dtype, weights[0].dtype)
    out = np.take(y, base).astype(dt, copy=False)
    out *= weights[0]
    tap = np.empty(len(base), dtype=y.dtype)
    prod = np.empty(len(base), dtype=dt)
    for j in range(1, 6):
        np.take(y[j:], base, out=tap)
        np.multiply(tap, weights[j], out=prod)
        out += prod
    return out.astype(np.float64)


def _kaiser_taps(tw_hz: float, rate_hz: float) -> int:
    """Odd number of taps of a Kaiser-window low-pass with transition width ``tw_hz`` (Kaiser 1974)."""
    n = math.ceil((PROTECTION_DB - 7.95) / (14.36 * tw_hz / rate_hz)) + 1
    return n + 1 - n % 2


@dataclass(frozen=True)
class _Design:
    stop_hz: float
    pass_hz: float
    n_taps: int
    key: tuple
    narrowed: bool = False
    slow: bool = False
    raw: bool = False


@dataclass(frozen=True)
class _Plan:
    a: int            # first output position (input samples) of the block
    valid: int        # output positions [a, a + valid)
    nfft: int         # FFT length of the block (input samples)
    n_grid: int       # inverse-FFT length: the interpolation grid has n_grid points per nfft
    margin: int       # input samples kept each side of the output range
    design: _Design
    f_hi: float       # top speed over the block (rev/s)

    @property
    def s0(self) -> int:
        return self.a - self.margin - (self.design.n_taps - 1) // 2

    @property
    def support(self) -> int:
        """Input samples the block's outputs depend on, from s0."""
        return self.valid + self.design.n_taps - 1 + 2 * self.margin


def _grid_floor(v: float) -> int:
    return math.floor(_Q * math.log2(v))


def _grid_ceil(v: float) -> int:
    return math.ceil(_Q * math.log2(v))


class OrderTracker:
    """Streaming computed order tracker: feed time chunks, receive angle-domain pieces.

    Parameters
    ----------
    rate_hz : float
        Sample rate of the channel (Hz).
    angle : ShaftAngle
        Shaft angle against time (from :func:`tacho_angle` or a known speed).  Only the part of
        the record inside its span is tracked.
    samples_per_rev : int
        Samples per revolution of the output (>= 4); the order Nyquist is half of it.
    protect : bool
        Apply the speed-tracking low-pass that keeps content above the order Nyquist out of the
        order domain (see the module notes).  ``False`` interpolates the raw record at the
        angle instants, so such content folds.
    max_order : float, optional
        Highest order that must pass unattenuated (the passband edge); 0 < max_order <
        0.95 x order Nyquist.  Default 0.8 x order Nyquist (``samples_per_rev / 2.5``).
    threads : int or None
        Threads filtering and interpolating consecutive blocks (default 1: in the caller's
        thread; None: the machine's cores).  Up to ``threads`` blocks are in flight, so
        :meth:`feed` may return a piece one or two calls later; the pieces and their values
        do not depend on it.

    Notes
    -----
    The output grid is anchored to the shaft angle: sample ``k`` sits at ``k /
    samples_per_rev`` revolutions, from the first such angle inside the record and the angle's
    span.  Pieces do not depend on how the input is cut into chunks.  Samples within about
    ``80 / samples_per_rev`` revolutions of the record's ends see the filter's start-up (the
    record is taken as zero outside).  Work is done in single precision inside the FFT
    (rounding about -140 dB); the output is float64.

    Examples
    --------
    >>> import numpy as np
    >>> rate = 4096.0
    >>> angle = ShaftAngle.from_rpm(600.0, 4.0)
    >>> t = np.arange(int(4 * rate)) / rate
    >>> x = np.cos(2 * np.pi * 3 * angle.revs_at(t))          # order 3
    >>> tr = OrderTracker(rate, angle, samples_per_rev=32)
    >>> sig = AngleSignal.concatenate(list(tr.stream(x)))
    >>> sig.n_samples, sig.samples_per_rev
    (1280, 32)
    >>> bool(np.max(np.abs(sig.data[200:-200] - np.cos(2 * np.pi * 3 * sig.revs[200:-200]))) < 1e-4)
    True
    """

    def __init__(self, rate_hz: float, angle: ShaftAngle, *, samples_per_rev: int = 256,
                 protect: bool = True, max_order: float | None = None, threads: int | None = 1):
        self.rate_hz = checks.rate_hz(None, "rate_hz", rate_hz)
        self.threads = resolve_threads(threads)
        if not isinstance(angle, ShaftAngle):
            raise InputError(f"angle = {show(angle)}: must be a "
                             "ShaftAngle (from tacho_angle, ShaftAngle.from_rpm or "
                             "ShaftAngle.from_speed_table)")
        self.angle = angle
        # An angle with gaps (a stop, a reversal, pulses lost in a row) is tracked stretch by
        # stretch, each by a tracker of its own fed the same chunks; the pieces follow one
        # another with a jump in angle across each gap.
        self._subs = None
        if angle.gaps:
            self._subs = [OrderTracker(rate_hz, a, samples_per_rev=samples_per_rev,
                                       protect=protect, max_order=max_order, threads=threads)
                          for a in angle.stretch_angles()]
            self._queues: list[list] = [[] for _ in self._subs]
            self._current = 0
        self.samples_per_rev = checks.positive_int(None, "samples_per_rev", samples_per_rev, low=4, whole_float=False)
        if not isinstance(protect, (bool, np.bool_)):
            raise InputError(f"protect = {show(protect)}: must be True or False")
        self.protect = bool(protect)
        nyq = self.samples_per_rev / 2.0
        if max_order is None:
            max_order = DEFAULT_MAX_ORDER_FRACTION * nyq
        max_order = checks.real(None, "max_order", max_order)
        if not 0 < max_order < 0.95 * nyq:
            raise InputError(f"max_order = {show(max_order)}: must be 0 < max_order < "
                             f"{0.95 * nyq:g} (0.95 x the order Nyquist samples_per_rev/2 = "
                             f"{nyq:g})")
        self.max_order = max_order
        self.order_nyquist = nyq
        self._cache: dict = {}
        self._t_lo = max(0.0, angle.t_start_s)
        if self._t_lo > angle.t_end_s:
            raise InputError(f"the shaft angle spans {angle.t_start_s:g} to {angle.t_end_s:g} s, "
                             "before the record starts (0 s); nothing to track")
        spr = self.samples_per_rev
        self._k_next = math.ceil(spr * float(angle.revs_at(self._t_lo)) - 1e-9)
        self._k_stop = math.floor(spr * float(angle.pulse_revs[-1]) + 1e-9) + 1  # exclusive
        t_first = float(angle._invert(np.array([self._k_next / spr]))[0][0])
        self._a = max(0, int(math.floor(t_first * self.rate_hz)))
        self._guess = (1, 0)
        self._last_design: _Design | None = None
        self._plan: _Plan | None = None
        self._bufs: list[tuple[int, np.ndarray]] = []
        self._n_in = 0
        self._finished = False
        self._narrow: list[tuple[float, float, float]] = []
        self._slow: list[tuple[float, float]] = []
        self._warned = False
        self._n_out = 0
        self._blocks = 0
        self._rows: int | None = None      # None: 1-D chunks; else channels per 2-D chunk
        self._pending: deque = deque()     # blocks in flight on the pool, in order
        self._pool = None

    # ---- planning --------------------------------------------------------------------------
    def _margin(self, design: _Design) -> int:
        """Input samples that keep the spline's prefilter clear of the FFT block's edges."""
        return math.ceil(_SPLINE_GUARD * _CONTENT_FRACTION * self.rate_hz / design.stop_hz) + 2

    def _design(self, f_lo: float, f_hi: float) -> _Design:
        """Low-pass edges for a block whose speeds span [f_lo, f_hi] (rev/s)."""
        R = self.rate_hz
        stop_t = self.order_nyquist * f_lo
        if not self.protect or stop_t >= 0.5 * R:
            # No order-domain protection needed (or asked for): a fixed low-pass at the time
            # Nyquist keeps each FFT block band-limited, so the interpolation stays exact.
            stop, pass_ = 0.5 * R, _RAW_PASS * R
            return _Design(stop, pass_, _kaiser_taps(stop - pass_, R), ("raw",), raw=True)
        prev = self._last_design
        if (prev is not None and not (prev.raw or prev.narrowed or prev.slow)
                and prev.stop_hz <= stop_t and prev.pass_hz >= self.max_order * f_hi):
            return prev
        pass_t = self.max_order * f_hi
        tw_nom = stop_t * (1.0 - self.max_order / self.order_nyquist)
        tw_min = (PROTECTION_DB - 7.95) / (14.36 * (_N_MAX - 1)) * R
        narrowed = slow = False
        if 0.5 * tw_nom < tw_min:            # shaft (nearly) at rest: longest filter allowed
            slow = True
            i_s = _grid_ceil(2 * tw_min) if stop_t <= 2 * tw_min else _grid_floor(stop_t)
            i_p = _grid_floor(2.0 ** (i_s / _Q) - tw_min)
        else:
            i_s = _grid_floor(stop_t * (1 - _SLACK))
            i_p = _grid_ceil(pass_t * (1 + _SLACK))
            if 2.0 ** (i_s / _Q) - 2.0 ** (i_p / _Q) < 0.5 * tw_nom:      # no room for slack
                i_s, i_p = _grid_floor(stop_t), _grid_ceil(pass_t)
                if 2.0 ** (i_s / _Q) - 2.0 ** (i_p / _Q) < 0.5 * tw_nom:
                    narrowed = True
                    i_p = _grid_floor(2.0 ** (i_s / _Q) - 0.5 * tw_nom)
        stop_q, pass_q = 2.0 ** (i_s / _Q), 2.0 ** (i_p / _Q)
        return _Design(stop_q, pass_q, _kaiser_taps(stop_q - pass_q, R), (i_s, i_p),
                       narrowed=narrowed, slow=slow)

    def _make_plan(self, a: int) -> _Plan:
        R = self.rate_hz
        ang = self.angle
        n_taps, margin = self._guess
        nfft = _NFFT0
        while nfft < 4 * (n_taps - 1 + 2 * margin):
            nfft *= 2
        for _ in range(200):
            valid = nfft - (n_taps - 1) - 2 * margin
            if valid < 1:
                nfft *= 2
                continue
            # Speeds over the outputs and a quarter filter length each side: the span over
            # which the low-pass's main lobe sees the input of the block's first and last
            # outputs.
            reach = (n_taps - 1) // 4
            ta = max((a - reach) / R, ang.t_start_s)
            tb = min((a + valid + reach) / R, ang.t_end_s)
            f_lo, f_hi = ang._speed_range_hz(ta, max(ta, tb))
            d = self._design(f_lo, f_hi)
            m = self._margin(d)
            if d.n_taps > n_taps or m > margin:
                n_taps, margin = max(n_taps, d.n_taps), max(margin, m)
                continue
            if d.narrowed and nfft > 1024:
                smaller = nfft // 2 - (n_taps - 1) - 2 * margin
                if smaller >= max(n_taps // 8, 64):
                    nfft //= 2
                    continue
            break
        self._guess = (d.n_taps, m)
        self._last_design = d
        n_grid = sfft.next_fast_len(
            max(16, math.ceil(nfft * d.stop_hz / (R * _CONTENT_FRACTION))), real=True)
        if d.narrowed:
            self._narrow.append((a / R, (a + valid) / R, d.pass_hz / f_hi))
        if d.slow:
            self._slow.append((a / R, (a + valid) / R))
        return _Plan(a=a, valid=valid, nfft=nfft, n_grid=n_grid, margin=margin, design=d,
                     f_hi=f_hi)

    def _gain(self, plan: _Plan) -> tuple[np.ndarray, int]:
        """Real spectral gain (low-pass / B-spline spectrum, scaled) and the bins it spans."""
        d = plan.design
        key = d.key + (d.n_taps, plan.nfft, plan.n_grid)
        hit = self._cache.get(key)
        if hit is not None:
            return hit
        nfft, n_o, R = plan.nfft, plan.n_grid, self.rate_hz
        beta = 0.1102 * (PROTECTION_DB - 8.7)
        h = kaiser_lowpass(d.n_taps, 0.5 * (d.stop_hz + d.pass_hz), R, beta)
        c = (d.n_taps - 1) // 2
        z = np.zeros(nfft)
        z[:c + 1] = h[c:]
        if c:
            z[-c:] = h[:c]
        nb = min(nfft // 2 + 1, n_o // 2 + 1, math.ceil(d.stop_hz / R * nfft) + 3)
        H = sfft.rfft(z)[:nb].real
        nu = np.arange(nb) / n_o
        gain = (H / _bspline5_spectrum(nu) * (n_o / nfft)).astype(np.float32)
        hit = (gain, nb)
        if len(self._cache) > 64:
            self._cache.clear()
        self._cache[key] = hit
        return hit

    # ---- buffering -------------------------------------------------------------------------
    def _gather(self, s0: int, n: int, nfft: int) -> np.ndarray:
        """Samples [s0, s0 + n) in an FFT buffer of nfft (channels x nfft), zero elsewhere (and
        outside the record), whatever chunks they arrived in."""
        out = np.empty((self._rows or 1, nfft), dtype=np.float32)
        filled = []
        for start, arr in self._bufs:
            lo = max(s0, start)
            hi = min(s0 + n, start + arr.shape[-1])
            if hi > lo:
                out[:, lo - s0:hi - s0] = arr[..., lo - start:hi - start]
                filled.append((lo - s0, hi - s0))
        end = 0                         # zero what no chunk filled
        for a, b in sorted(filled):
            if a > end:
                out[:, end:a] = 0.0
            end = max(end, b)
        out[:, end:] = 0.0
        return out

    def _discard_before(self, s: int) -> None:
        self._bufs = [(st, arr) for st, arr in self._bufs if st + arr.shape[-1] > s]

    # ---- processing ------------------------------------------------------------------------
    def _k_limit(self) -> int:
        lim = self._k_stop
        if self._finished:
            t_last = (self._n_in - 1) / self.rate_hz
            if t_last < self.angle.t_start_s:
                lim = min(lim, self._k_next)
            elif t_last < self.angle.t_end_s:
                r = float(self.angle.revs_at(t_last))
                lim = min(lim, math.floor(self.samples_per_rev * r + 1e-9) + 1)
        return lim

    def _drain(self) -> Iterator[AngleSignal]:
        spr = self.samples_per_rev
        R = self.rate_hz
        while self._k_next < self._k_limit():
            if self._plan is None:
                self._plan = self._make_plan(self._a)
            plan = self._plan
            s0 = plan.s0
            if not self._finished and self._n_in < s0 + plan.support:
                self._discard_before(s0)      # nothing before the block is needed again
                return
            tb = (plan.a + plan.valid) / R
            if tb >= self.angle.t_end_s:
                k1 = self._k_stop
            else:
                k1 = math.ceil(spr * float(self.angle.revs_at(tb)) - 1e-12)
            k0 = self._k_next
            k1 = min(k1, self._k_limit())
            if k1 > k0:
                job = self._prepare(plan, k0, k1)
                if self.threads <= 1:
                    yield self._unwrap(_compute_block(job))
                else:
                    if self._pool is None:
                        from concurrent.futures import ThreadPoolExecutor

                        self._pool = ThreadPoolExecutor(max_workers=self.threads,
                                                        thread_name_prefix="foldline-track")
                    self._pending.append(self._pool.submit(_compute_block, job))
                    while len(self._pending) > self.threads:
                        yield self._unwrap(self._pending.popleft().result())
                self._k_next = k1
            self._a = plan.a + plan.valid
            self._plan = self._make_plan(self._a) if self._k_next < self._k_stop else None
            keep_from = self._plan.s0 if self._plan is not None else self._n_in
            self._discard_before(keep_from)
            if plan.design.narrowed and not self._warned:
                self._warned = True
                warnings.warn(
                    f"order tracking: between {plan.a / R:.3f} and {tb:.3f} s the speed changes "
                    f"too fast for a full passband within one filter length; the alias-"
                    f"protection passband there was narrowed to order "
                    f"{plan.design.pass_hz / plan.f_hi:.4g} (asked: {self.max_order:g}); orders above "
                    "it are attenuated there (the log lists every such span)",
                    FoldlineWarning, stacklevel=3)

    def _prepare(self, plan: _Plan, k0: int, k1: int) -> tuple:
        """Everything a block needs, gathered here (one thread); the work is
        :func:`_compute_block`, which may run on the pool."""
        R = self.rate_hz
        t, rpm = self.angle._grid_times(k0, k1, self.samples_per_rev)
        x = self._gather(plan.s0, plan.support, plan.nfft)
        gain, nb = self._gain(plan)
        q = (t * R - plan.s0) * (plan.n_grid / plan.nfft)
        self._n_out += k1 - k0
        self._blocks += 1
        return (x, gain, nb, plan.n_grid, q, rpm, self.samples_per_rev, k0)

    def _unwrap(self, pieces: tuple):
        return pieces[0] if self._rows is None else pieces

    def _drain_pending(self) -> Iterator:
        while self._pending:
            yield self._unwrap(self._pending.popleft().result())

    # ---- public ----------------------------------------------------------------------------
    def feed(self, chunk) -> list[AngleSignal]:
        """Process the next chunk of the channel.

        Parameters
        ----------
        chunk : array_like, shape (n,) or (n_channels, n)
            Consecutive samples (any length; not modified).  2-D chunks track several
            channels against the same shaft angle (every chunk must have the first one's
            number of channels).

        Returns
        -------
        list of AngleSignal, or list of tuple of AngleSignal
            Angle-domain pieces completed so far (consecutive, possibly none); for 2-D chunks
            one tuple per piece, one signal per channel (they share ``rpm``).
        """
        if self._finished:
            raise InputError("OrderTracker.feed called after finish(); create a new tracker")
        x = _one_or_two_d(chunk)
        rows = None if x.ndim == 1 else x.shape[0]
        if self._n_in == 0 and not self._bufs:
            self._rows = rows
        elif rows != self._rows:
            raise InputError(f"chunk starting at sample {self._n_in} has shape {x.shape}; "
                             f"allowed: the shape of the first chunk "
                             f"({'1-D' if self._rows is None else f'{self._rows} channels'})")
        if not np.isfinite(x).all():
            raise InputError(f"chunk starting at sample {self._n_in} holds NaN or infinite "
                             "values; allowed: finite numbers")
        if self._subs is not None:
            self._n_in += x.shape[-1]
            for sub, queue in zip(self._subs, self._queues):
                queue.extend(sub.feed(x))
            return self._release()
        if x.shape[-1] and self._k_next < self._k_stop:
            self._bufs.append((self._n_in, x))
        self._n_in += x.shape[-1]
        return list(self._drain())

    def finish(self) -> list[AngleSignal]:
        """End of the record: process what is left (the record is zero beyond its end)."""
        if self._finished:
            return []
        self._finished = True
        if self._n_in == 0:
            raise InputError("the record is empty; nothing to track")
        if self._subs is not None:
            for sub, queue in zip(self._subs, self._queues):
                queue.extend(sub.finish())
            self._n_out = sum(sub._n_out for sub in self._subs)
            self._blocks = sum(sub._blocks for sub in self._subs)
            return self._release()
        try:
            out = list(self._drain())
            out.extend(self._drain_pending())
        finally:
            self._bufs = []
            if self._pool is not None:
                self._pool.shutdown(wait=True, cancel_futures=True)
                self._pool = None
        return out

    def _release(self) -> list[AngleSignal]:
        """Pieces of the stretches in order: a stretch's pieces wait until the one before it
        is complete."""
        out: list[AngleSignal] = []
        while self._current < len(self._subs):
            sub, queue = self._subs[self._current], self._queues[self._current]
            out.extend(queue)
            queue.clear()
            if not (sub._finished or sub._k_next >= sub._k_stop):
                break
            self._current += 1
        return out

    def stream(self, x) -> Iterator[AngleSignal]:
        """Track a whole signal, yielding consecutive angle-domain pieces.

        Parameters
        ----------
        x : array_like, shape (n,) or (n_channels, n); or iterable of such chunks; or
            callable returning one
            The channel (or channels: pieces are then tuples, one signal per channel).
        """
        try:
            for chunk in _chunks_any(x):
                yield from self.feed(chunk)
            yield from self.finish()
        finally:    # also when the consumer stops early: no thread left waiting
            if self._pool is not None:
                self._pool.shutdown(wait=False, cancel_futures=True)
                self._pool = None
        if self._n_out == 0:
            raise InputError(
                f"the record (0 to {self._n_in / self.rate_hz:g} s) and the shaft angle "
                f"({self.angle.t_start_s:g} to {self.angle.t_end_s:g} s) share no complete "
                "angle step; nothing to track")

    @property
    def log(self) -> tuple[str, ...]:
        """What was done, in words (complete after :meth:`finish`)."""
        if self._subs is not None:
            lines = [f"order tracking in {len(self._subs)} stretches (the speed is unknown "
                     "between them): " + ", ".join(f"{a.t_start_s:.3f}-{a.t_end_s:.3f} s"
                                                   for a in (t.angle for t in self._subs))]
            for sub in self._subs:
                lines += [ln for ln in sub.log if ln not in lines]
            return tuple(lines)
        R = self.rate_hz
        lines = [f"order tracking: {self.samples_per_rev} samples/rev (order Nyquist "
                 f"{self.order_nyquist:g}), rate {R:g} Hz, {self._n_out} samples in "
                 f"{self._blocks} blocks"]
        if self.protect:
            lines.append(
                f"alias protection: speed-tracking Kaiser low-pass ({PROTECTION_DB:g} dB), "
                f"passband to order {self.max_order:g} at each block's top speed, stopband from "
                f"order {self.order_nyquist:g} at its lowest speed")
        else:
            lines.append("alias protection: off (content above the order Nyquist folds)")
        lines.append("interpolation: quintic cardinal spline on a grid >= 8 x its highest "
                     "frequency; angle instants from the shaft-angle fit")
        for ta, tb, order in _merge_spans(self._narrow):
            lines.append(f"passband narrowed to order {order:.3g} between {ta:.3f} and {tb:.3f} s "
                         "(speed changes too fast)")
        for ta, tb, _ in _merge_spans([(a, b, 0.0) for a, b in self._slow]):
            lines.append(f"between {ta:.3f} and {tb:.3f} s the shaft turns too slowly for full "
                         "alias protection")
        return tuple(lines)


def _one_or_two_d(chunk) -> np.ndarray:
    a = np.asarray(chunk)
    if a.ndim == 2:
        if not (np.issubdtype(a.dtype, np.floating) or np.issubdtype(a.dtype, np.integer)):
            raise InputError(f"chunk has dtype {a.dtype}; allowed: real numbers")
        if a.shape[0] < 1:
            raise InputError("chunk has no channel (shape (0, n)); allowed: at least one row")
        return a if np.issubdtype(a.dtype, np.floating) else a.astype(np.float64)
    return one_d(a, "chunk")


def _chunks_any(x) -> Iterator[np.ndarray]:
    """Chunks of a 1-D or 2-D (channels x samples) signal, or of an iterable of chunks."""
    if callable(x) and not isinstance(x, np.ndarray):
        x = x()
    if isinstance(x, np.ndarray) and x.ndim == 2:
        step = max(1, CHUNK_SAMPLES // max(1, x.shape[0]))
        for i in range(0, x.shape[1], step):
            yield x[:, i:i + step]
        return
    if isinstance(x, np.ndarray) or (isinstance(x, (list, tuple)) and len(x) > 0
                                     and np.isscalar(x[0])):
        yield from iter_chunks(x, "x")
        return
    if not hasattr(x, "__iter__"):
        yield from iter_chunks(x, "x")        # raises the usual message
        return
    yield from x


def _compute_block(job: tuple) -> tuple[AngleSignal, ...]:
    """Filter (FFT), resample onto the interpolation grid and interpolate one block of every
    channel at the block's angle instants.  Pure function of ``job``: runs on any thread."""
    x, gain, nb, n_grid, q, rpm, spr, k0 = job
    X = sfft.rfft(x, axis=-1)[:, :nb]
    X *= gain
    y = sfft.irfft(X, n_grid, axis=-1)
    i = np.floor(q)
    base = i.astype(np.intp) - 2
    np.clip(base, 0, n_grid - 6, out=base)      # never reached: guard samples keep q inside
    # Weights shared by every channel of the block; single precision like the FFTs (relative
    # rounding about 1e-7, -140 dB).
    weights = _quintic_weights((q - i).astype(y.dtype))
    revs_start = k0 / spr
    return tuple(AngleSignal(_quintic_eval(row, base, weights), spr, revs_start, rpm)
                 for row in y)


def _merge_spans(spans):
    out = []
    for ta, tb, v in spans:
        if out and ta <= out[-1][1] + 1e-9:
            pa, _, pv = out[-1]
            out[-1] = (pa, tb, min(pv, v))
        else:
            out.append((ta, tb, v))
    return out


def iter_resample_to_angle_channels(x, rate_hz: float, angle: ShaftAngle, *,
                              samples_per_rev: int = 256, protect: bool = True,
                              max_order: float | None = None, threads: int | None = 1
                              ) -> Iterator[tuple[AngleSignal, ...]]:
    """Computed order tracking of several channels against one shaft angle, as a stream.

    The block plan (filter design, angle instants, interpolation taps and weights) is made
    once per block and applied to every channel, so tracking n channels costs one plan and n
    filterings and interpolations; each channel's pieces equal those of tracking it alone.

    Parameters
    ----------
    x : array_like, shape (n_channels, n); or iterable of 2-D chunks; or callable returning one
        The channels, sampled at ``rate_hz`` from time 0 (chunks cut along time).
    rate_hz, angle, samples_per_rev, protect, max_order
        As for :func:`resample_to_angle`.
    threads : int or None
        Threads filtering and interpolating consecutive blocks (None: the machine's cores);
        the result does not depend on it.

    Yields
    ------
    tuple of AngleSignal
        One piece per channel, consecutive; the last tuple's signals hold the tracker's log.
    """
    tracker = OrderTracker(rate_hz, angle, samples_per_rev=samples_per_rev, protect=protect,
                           max_order=max_order, threads=threads)
    last = None
    for pieces in tracker.stream(x):
        if not isinstance(pieces, tuple):
            raise InputError("iter_resample_to_angle_channels needs 2-D chunks (channels x samples); "
                             "for one 1-D channel use iter_resample_to_angle")
        if last is not None:
            yield last
        last = pieces
    if last is not None:
        yield tuple(AngleSignal(p.data, p.samples_per_rev, p.revs_start, p.rpm, tracker.log)
                    for p in last)


def iter_resample_to_angle(x, rate_hz: float, angle: ShaftAngle, *, samples_per_rev: int = 256,
                     protect: bool = True, max_order: float | None = None,
                     threads: int | None = 1) -> Iterator[AngleSignal]:
    """Computed order tracking as a stream of consecutive angle-domain pieces.

    Same parameters as :func:`resample_to_angle` (and ``threads``, as for
    :func:`iter_resample_to_angle_channels`); use it (with :func:`order_spectrum` /
    :func:`order_map`, which accept the stream) when the angle signal need not be held whole.

    Yields
    ------
    AngleSignal
        Consecutive pieces; the last one's ``log`` holds the tracker's log.
    """
    tracker = OrderTracker(rate_hz, angle, samples_per_rev=samples_per_rev, protect=protect,
                           max_order=max_order, threads=threads)
    last = None
    for piece in tracker.stream(lambda: iter_chunks(x, "x")):
        if last is not None:
            yield last
        last = piece
    if last is not None:
        yield AngleSignal(last.data, last.samples_per_rev, last.revs_start, last.rpm,
                          tracker.log)


def resample_to_angle(x, rate_hz: float, angle: ShaftAngle, *, samples_per_rev: int = 256,
                protect: bool = True, max_order: float | None = None,
                threads: int | None = 1) -> AngleSignal:
    """Resample a channel at constant shaft-angle increments (computed order tracking).

    Parameters
    ----------
    x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The channel, sampled at ``rate_hz`` from time 0.  Chunks let a record larger than
        memory be tracked (the result itself is held whole; see :func:`iter_resample_to_angle`).
    rate_hz : float
        Sample rate (Hz).
    angle : ShaftAngle
        Shaft angle against time.
    samples_per_rev : int
        Samples per revolution (order Nyquist = samples_per_rev / 2).
    protect : bool
        Alias protection (speed-tracking low-pass); see the module notes.
    max_order : float, optional
        Passband edge in orders; default 0.8 x order Nyquist.
    threads : int or None
        Threads filtering and interpolating consecutive blocks (default 1; None: the machine's
        cores).  The result does not depend on it.

    Returns
    -------
    AngleSignal
        ``data`` (n,), ``samples_per_rev``, ``revs_start``, ``rpm`` (n,), ``log``.

    Raises
    ------
    InputError
        Bad arguments, or a record and shaft angle that do not overlap.

    Warns
    -----
    FoldlineWarning
        Where the speed changes too fast for the full passband and it was narrowed.

    Notes
    -----
    Usable orders run up to ``max_order`` (0.8 x order Nyquist by default, covering the
    analyser convention samples_per_rev / 2.56); accuracy is measured in
    ``tests/test_angle_tracking.py``: order amplitudes within 0.1 dB up to 0.8 x order
    Nyquist, a pure order tone within -80 dB of the exact angle-domain signal, content above
    the order Nyquist at least 80 dB down.

    References
    ----------
    .. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking", Mechanical
       Systems and Signal Processing 11(2):187-205, 1997.
    .. [2] J. O. Smith and P. Gossett, "A flexible sampling-rate conversion method", Proc. IEEE
       ICASSP 9:112-115, 1984.

    Examples
    --------
    >>> import numpy as np
    >>> rate = 4096.0
    >>> angle = ShaftAngle.from_speed_table([0.0, 4.0], [600.0, 900.0])
    >>> t = np.arange(int(4 * rate) + 1) / rate
    >>> sig = resample_to_angle(np.sin(2 * np.pi * 2 * angle.revs_at(t)), rate, angle,
    ...                   samples_per_rev=64)
    >>> sig.revolutions, float(sig.rpm[0]), float(sig.rpm[-1])
    (50.015625, 600.0, 900.0)
    """
    tracker = OrderTracker(rate_hz, angle, samples_per_rev=samples_per_rev, protect=protect,
                           max_order=max_order, threads=threads)
    pieces = list(tracker.stream(lambda: iter_chunks(x, "x")))
    return AngleSignal.concatenate(pieces, tracker.log)
