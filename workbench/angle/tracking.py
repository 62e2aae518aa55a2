"""Computed order tracking: resample a vibration channel at constant shaft-angle increments.

Design (alias-protected, streaming, one core)
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
   is then evaluated at the angle instants (``scipy.ndimage.map_coordinates``, compiled).
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
   1989 (overlap-save block convolution).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft
from scipy import ndimage
from scipy.signal import firwin

from workbench.angle._common import finite_real, iter_chunks, one_d, positive_int, positive_rate
from workbench.angle.tacho import ShaftAngle
from workbench.errors import FoldlineWarning, InputError

__all__ = ["AngleSignal", "OrderTracker", "order_track", "iter_order_track",
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
        positive_int(self.samples_per_rev, "AngleSignal: samples_per_rev")
        finite_real(self.revs_start, "AngleSignal: revs_start")
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
                 protect: bool = True, max_order: float | None = None):
        self.rate_hz = positive_rate(rate_hz)
        if not isinstance(angle, ShaftAngle):
            raise InputError(f"angle of type {type(angle).__name__} is not valid; allowed: a "
                             "ShaftAngle (from tacho_angle, ShaftAngle.from_rpm or "
                             "ShaftAngle.from_speed_table)")
        self.angle = angle
        # An angle with gaps (a stop, a reversal, pulses lost in a row) is tracked stretch by
        # stretch, each by a tracker of its own fed the same chunks; the pieces follow one
        # another with a jump in angle across each gap.
        self._subs = None
        if angle.gaps:
            self._subs = [OrderTracker(rate_hz, a, samples_per_rev=samples_per_rev,
                                       protect=protect, max_order=max_order)
                          for a in angle.stretch_angles()]
            self._queues: list[list] = [[] for _ in self._subs]
            self._current = 0
        self.samples_per_rev = positive_int(samples_per_rev, "samples_per_rev", 4)
        if not isinstance(protect, (bool, np.bool_)):
            raise InputError(f"protect {protect!r} is not valid; allowed: True or False")
        self.protect = bool(protect)
        nyq = self.samples_per_rev / 2.0
        if max_order is None:
            max_order = DEFAULT_MAX_ORDER_FRACTION * nyq
        max_order = finite_real(max_order, "max_order")
        if not 0 < max_order < 0.95 * nyq:
            raise InputError(f"max_order {max_order!r} is not valid; allowed: 0 < max_order < "
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
        h = firwin(d.n_taps, 0.5 * (d.stop_hz + d.pass_hz), window=("kaiser", beta), fs=R)
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
        """Samples [s0, s0 + n) in an FFT buffer of nfft, zero elsewhere (and outside the
        record), whatever chunks they arrived in."""
        out = np.zeros(nfft, dtype=np.float32)
        for start, arr in self._bufs:
            lo = max(s0, start)
            hi = min(s0 + n, start + len(arr))
            if hi > lo:
                out[lo - s0:hi - s0] = arr[lo - start:hi - start]
        return out

    def _discard_before(self, s: int) -> None:
        self._bufs = [(st, arr) for st, arr in self._bufs if st + len(arr) > s]

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
                yield self._block(plan, k0, k1)
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

    def _block(self, plan: _Plan, k0: int, k1: int) -> AngleSignal:
        R = self.rate_hz
        t, rpm = self.angle._grid_times(k0, k1, self.samples_per_rev)
        x = self._gather(plan.s0, plan.support, plan.nfft)
        gain, nb = self._gain(plan)
        X = sfft.rfft(x)[:nb]
        X *= gain
        y = sfft.irfft(X, plan.n_grid)
        q = (t * R - plan.s0) * (plan.n_grid / plan.nfft)
        data = ndimage.map_coordinates(y, q[None, :], order=5, prefilter=False,
                                       mode="mirror", output=np.float64)
        self._n_out += k1 - k0
        self._blocks += 1
        return AngleSignal(data, self.samples_per_rev, k0 / self.samples_per_rev, rpm)

    # ---- public ----------------------------------------------------------------------------
    def feed(self, chunk) -> list[AngleSignal]:
        """Process the next chunk of the channel.

        Parameters
        ----------
        chunk : array_like, shape (n,)
            Consecutive samples (any length; not modified).

        Returns
        -------
        list of AngleSignal
            Angle-domain pieces completed so far (consecutive, possibly none).
        """
        if self._finished:
            raise InputError("OrderTracker.feed called after finish(); create a new tracker")
        x = one_d(chunk, "chunk")
        if not np.isfinite(x).all():
            raise InputError(f"chunk starting at sample {self._n_in} holds NaN or infinite "
                             "values; allowed: finite numbers")
        if self._subs is not None:
            self._n_in += len(x)
            for sub, queue in zip(self._subs, self._queues):
                queue.extend(sub.feed(x))
            return self._release()
        if len(x) and self._k_next < self._k_stop:
            self._bufs.append((self._n_in, x))
        self._n_in += len(x)
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
        out = list(self._drain())
        self._bufs = []
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
        x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
            The channel.
        """
        for chunk in iter_chunks(x, "x"):
            yield from self.feed(chunk)
        yield from self.finish()
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


def _merge_spans(spans):
    out = []
    for ta, tb, v in spans:
        if out and ta <= out[-1][1] + 1e-9:
            pa, _, pv = out[-1]
            out[-1] = (pa, tb, min(pv, v))
        else:
            out.append((ta, tb, v))
    return out


def iter_order_track(x, rate_hz: float, angle: ShaftAngle, *, samples_per_rev: int = 256,
                     protect: bool = True, max_order: float | None = None
                     ) -> Iterator[AngleSignal]:
    """Computed order tracking as a stream of consecutive angle-domain pieces.

    Same parameters as :func:`order_track`; use it (with :func:`order_spectrum` /
    :func:`order_map`, which accept the stream) when the angle signal need not be held whole.

    Yields
    ------
    AngleSignal
        Consecutive pieces; the last one's ``log`` holds the tracker's log.
    """
    tracker = OrderTracker(rate_hz, angle, samples_per_rev=samples_per_rev, protect=protect,
                           max_order=max_order)
    last = None
    for piece in tracker.stream(x):
        if last is not None:
            yield last
        last = piece
    if last is not None:
        yield AngleSignal(last.data, last.samples_per_rev, last.revs_start, last.rpm,
                          tracker.log)


def order_track(x, rate_hz: float, angle: ShaftAngle, *, samples_per_rev: int = 256,
                protect: bool = True, max_order: float | None = None) -> AngleSignal:
    """Resample a channel at constant shaft-angle increments (computed order tracking).

    Parameters
    ----------
    x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The channel, sampled at ``rate_hz`` from time 0.  Chunks let a record larger than
        memory be tracked (the result itself is held whole; see :func:`iter_order_track`).
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
    >>> sig = order_track(np.sin(2 * np.pi * 2 * angle.revs_at(t)), rate, angle,
    ...                   samples_per_rev=64)
    >>> sig.revolutions, float(sig.rpm[0]), float(sig.rpm[-1])
    (50.015625, 600.0, 900.0)
    """
    tracker = OrderTracker(rate_hz, angle, samples_per_rev=samples_per_rev, protect=protect,
                           max_order=max_order)
    pieces = list(tracker.stream(x))
    return AngleSignal.concatenate(pieces, tracker.log)
