"""Order spectra, order maps, order cuts, envelope order spectra and frequency maps.

All spectra are block FFTs with a window, amplitude-corrected for the window's coherent gain
(a sinusoid centred on a bin shows its own amplitude), averaged over blocks on power (RMS
averaging, so non-synchronous content does not cancel).  ``scaling="peak"`` gives peak
amplitudes, ``"rms"`` RMS amplitudes (peak / sqrt 2; the DC bin is the same in both).

Order spectra and maps are computed from the angle signal block by block
(:class:`OrderAnalysis`), so they accept the pieces streamed by
:func:`~workbench.angle.tracking.iter_resample_to_angle` as well as a whole
:class:`~workbench.angle.tracking.AngleSignal`: memory is the output plus one block.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
   transform", Proceedings of the IEEE 66(1):51-83, 1978.
.. [2] G. Heinzel, A. Ruediger and R. Schilling, "Spectrum and spectral density estimation by
   the Discrete Fourier transform (DFT), including a comprehensive list of window functions
   and some new flat-top windows", Max-Planck-Institut fuer Gravitationsphysik (AEI), 2002.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterable
from dataclasses import dataclass
from numbers import Integral

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import sliding_window_view

from workbench import checks
from workbench.checks import show
from workbench.angle._common import iter_chunks, one_d
from workbench.angle.shaft_angle import ShaftAngle
from workbench.angle.tracking import AngleSignal, iter_resample_to_angle
from workbench.errors import FoldlineWarning, InputError

__all__ = [
    "WindowGains", "window_gains",
    "OrderSpectrum", "OrderMap", "OrderCut", "FrequencyMap", "OrderPeaks",
    "OrderAnalysis",
    "order_spectrum", "order_map", "order_cut", "envelope_order_spectrum",
    "frequency_map", "find_order_peaks", "peak_amplitude",
    "DEFAULT_REVS_PER_BLOCK", "SCALINGS",
]

#: Revolutions per block when neither ``revs_per_block`` nor ``order_resolution`` is given.
DEFAULT_REVS_PER_BLOCK = 32
#: Amplitude scalings of every spectrum here.
SCALINGS = ("peak", "rms")
_FRAMES_PER_BATCH = 64


# --------------------------------------------------------------------------------------------
# Windows
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class WindowGains:
    """Amplitude and noise figures of a window of ``n`` samples (Harris 1978).

    Attributes
    ----------
    window : str
        The window as given.
    n : int
        Length (samples).
    coherent_gain : float
        Mean of the window: the gain a bin-centred sinusoid sees (Hann: 0.5).
    enbw_bins : float
        Equivalent noise bandwidth in bins: ``n sum(w^2) / sum(w)^2`` (Hann: 1.5).
    """

    window: str
    n: int
    coherent_gain: float
    enbw_bins: float

    @property
    def amplitude_correction(self) -> float:
        """Factor restoring a sinusoid's amplitude: 1 / coherent_gain (Hann: 2)."""
        return 1.0 / self.coherent_gain


def _hann_periodic(n: int) -> np.ndarray:
    """Periodic (DFT-even) Hann window of n samples, computed as scipy.signal.get_window("hann",
    n) does (a cosine sum on n + 1 points, the last dropped), without importing scipy.signal."""
    fac = np.linspace(-np.pi, np.pi, n + 1)
    w = np.zeros(n + 1)
    w += 0.5 * np.cos(0.0 * fac)
    w += 0.5 * np.cos(1.0 * fac)
    return w[:-1]


def _window(window, n: int) -> np.ndarray:
    if isinstance(window, str) and window in ("hann", "hanning") and n >= 2:
        return _hann_periodic(n)        # the default: no scipy.signal import (a second)
    try:
        from scipy.signal import get_window

        w = get_window(window, n, fftbins=True)
    except (ValueError, TypeError) as exc:
        raise InputError(f"window = {show(window)}: {exc}; allowed: a window name or "
                         "tuple understood by scipy.signal.get_window, e.g. 'hann', "
                         "'flattop', ('kaiser', 14)") from None
    return np.asarray(w, dtype=np.float64)


def window_gains(window="hann", n: int = 1024) -> WindowGains:
    """Coherent gain and equivalent noise bandwidth of a DFT-even window.

    Parameters
    ----------
    window : str or tuple
        Any window :func:`scipy.signal.get_window` understands (periodic form).
    n : int
        Length in samples.

    Returns
    -------
    WindowGains

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.

    Examples
    --------
    >>> g = window_gains("hann", 1024)
    >>> g.coherent_gain, g.enbw_bins
    (0.5, 1.5)
    """
    n = checks.positive_int(None, "n", n, low=2, whole_float=False)
    w = _window(window, n)
    s1 = float(w.sum())
    return WindowGains(str(window), n, round(s1 / n, 15), round(n * float((w * w).sum()) / s1 ** 2,
                                                                 15))


# --------------------------------------------------------------------------------------------
# Result objects
# --------------------------------------------------------------------------------------------

def _frozen(a, dtype=np.float64) -> np.ndarray:
    a = np.array(a, dtype=dtype, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class OrderSpectrum:
    """Averaged order spectrum.

    Attributes
    ----------
    order : ndarray, shape (n_orders,)
        Order of each bin (multiples of the reference shaft speed), step 1 / revs_per_block.
    amplitude : ndarray, shape (n_orders,)
        Window-corrected amplitude (peak or RMS, the channel's units), RMS-averaged over blocks.
    revs_per_block : float
        Revolutions per FFT block.
    n_blocks : int
        Blocks averaged.
    window : str or tuple
        The window as given (a :func:`scipy.signal.get_window` spec).
    scaling : {"peak", "rms"}
    enbw_bins : float
        Equivalent noise bandwidth of the window (bins).
    samples_per_rev : int
        Angle-domain samples per revolution of the signal analysed.
    """

    order: np.ndarray
    amplitude: np.ndarray
    revs_per_block: float
    n_blocks: int
    window: object = "hann"
    scaling: str = "peak"
    enbw_bins: float = 1.5
    samples_per_rev: int | None = None

    def __post_init__(self):
        object.__setattr__(self, "order", _frozen(self.order))
        object.__setattr__(self, "amplitude", _frozen(self.amplitude))
        if self.order.ndim != 1 or self.order.shape != self.amplitude.shape:
            raise InputError(f"OrderSpectrum: order {self.order.shape} and amplitude "
                             f"{self.amplitude.shape} must be 1-D of the same length")

    @property
    def order_resolution(self) -> float:
        """Bin spacing in orders: 1 / revs_per_block."""
        return 1.0 / self.revs_per_block


@dataclass(frozen=True, eq=False)
class OrderMap:
    """Order spectra against speed: one row per block (or per rpm bin).

    Attributes
    ----------
    rpm : ndarray, shape (n_rows,)
        Speed at each block's centre (rpm), or the rpm bin centres of a binned map.
    order : ndarray, shape (n_orders,)
    amplitude : ndarray, shape (n_rows, n_orders)
        Window-corrected amplitude of each bin; NaN in an empty rpm bin.
    revs : ndarray, shape (n_rows,)
        Shaft angle at each block's centre (rev); NaN for a binned map.
    n_averaged : ndarray of int, shape (n_rows,)
        Blocks in each row (1 for an unbinned map).
    revs_per_block : float
    window : str
    scaling : {"peak", "rms"}
    enbw_bins : float
    """

    rpm: np.ndarray
    order: np.ndarray
    amplitude: np.ndarray
    revs: np.ndarray
    n_averaged: np.ndarray
    revs_per_block: float
    window: str = "hann"
    scaling: str = "peak"
    enbw_bins: float = 1.5

    def __post_init__(self):
        for name in ("rpm", "order", "amplitude", "revs"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))
        object.__setattr__(self, "n_averaged", _frozen(self.n_averaged, np.int64))
        r, o = len(self.rpm), len(self.order)
        if self.amplitude.shape != (r, o) or self.revs.shape != (r,) or \
                self.n_averaged.shape != (r,):
            raise InputError(f"OrderMap: amplitude {self.amplitude.shape} must be (rpm {r}, "
                             f"order {o}), revs and n_averaged ({r},)")

    @property
    def order_resolution(self) -> float:
        """Bin spacing in orders."""
        return 1.0 / self.revs_per_block


@dataclass(frozen=True, eq=False)
class OrderCut:
    """Amplitude of one order against speed.

    Attributes
    ----------
    rpm : ndarray, shape (n,)
    amplitude : ndarray, shape (n,)
        Amplitude within ``order +- bandwidth_orders / 2`` (same scaling as the map).
    order : float
    bandwidth_orders : float
    """

    rpm: np.ndarray
    amplitude: np.ndarray
    order: float
    bandwidth_orders: float

    def __post_init__(self):
        object.__setattr__(self, "rpm", _frozen(self.rpm))
        object.__setattr__(self, "amplitude", _frozen(self.amplitude))


@dataclass(frozen=True, eq=False)
class FrequencyMap:
    """Time-domain spectra (Hz) against speed, from fixed-length blocks of the record.

    Attributes
    ----------
    rpm : ndarray, shape (n_blocks,)
        Speed at each block's centre (rpm).
    hz : ndarray, shape (n_freqs,)
    amplitude : ndarray, shape (n_blocks, n_freqs)
        Window-corrected amplitude.
    time_s : ndarray, shape (n_blocks,)
        Block centre times (s).
    window : str
    scaling : {"peak", "rms"}
    enbw_bins : float
    """

    rpm: np.ndarray
    hz: np.ndarray
    amplitude: np.ndarray
    time_s: np.ndarray
    window: str = "hann"
    scaling: str = "peak"
    enbw_bins: float = 1.5

    def __post_init__(self):
        for name in ("rpm", "hz", "amplitude", "time_s"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))


@dataclass(frozen=True, eq=False)
class OrderPeaks:
    """Peaks of an order spectrum, strongest first.

    Attributes
    ----------
    order : ndarray, shape (n,)
        Peak order, refined between bins by a parabola through the dB levels of the peak bin
        and its neighbours.
    amplitude : ndarray, shape (n,)
        Peak amplitude from the same parabola.
    prominence_db : ndarray, shape (n,)
        Height above the surrounding floor (dB), as :func:`scipy.signal.find_peaks` defines it.
    """

    order: np.ndarray
    amplitude: np.ndarray
    prominence_db: np.ndarray

    def __post_init__(self):
        for name in ("order", "amplitude", "prominence_db"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))

    def __len__(self) -> int:
        return len(self.order)


# --------------------------------------------------------------------------------------------
# Block spectra engine
# --------------------------------------------------------------------------------------------

def _check_options(window, overlap, scaling):
    if scaling not in SCALINGS:
        raise InputError(f"scaling = {show(scaling)}: must be 'peak' or 'rms'")
    overlap = checks.real(None, "overlap", overlap)
    if not 0 <= overlap < 1:
        raise InputError(f"overlap = {show(overlap)}: must be 0 <= overlap < 1 "
                         "(fraction of a block)")
    return overlap


def _add_rows(power: np.ndarray, count: np.ndarray, idx: np.ndarray, amp: np.ndarray) -> None:
    """power[idx[k]] += amp[k]**2 and count[idx[k]] += 1 for every row k (repeats summed):
    ``np.add.at`` by sorted runs of equal bins (consecutive blocks mostly share a bin)."""
    if len(idx) == 0:
        return
    order = np.argsort(idx, kind="stable")
    idx = idx[order]
    starts = np.flatnonzero(np.r_[True, idx[1:] != idx[:-1]])
    sq = amp[order]
    sq *= sq
    power[idx[starts]] += np.add.reduceat(sq, starts, axis=0)
    count[idx[starts]] += np.diff(np.r_[starts, len(idx)])


class _Blocks:
    """Windowed, amplitude-corrected FFT of consecutive (overlapping) blocks of a stream."""

    def __init__(self, n: int, hop: int, window, scaling: str, n_keep: int | None,
                 keep_rows: bool, bin_edges: np.ndarray | None = None, bin_key=None):
        self.n, self.hop = n, hop
        self.w = _window(window, n)
        s1 = float(self.w.sum())
        self.enbw = n * float((self.w ** 2).sum()) / s1 ** 2
        nbins = n // 2 + 1
        self.n_keep = nbins if n_keep is None else max(1, min(nbins, n_keep))
        scale = np.full(nbins, 2.0 / s1)
        scale[0] = 1.0 / s1
        if n % 2 == 0:
            scale[-1] = 1.0 / s1
        if scaling == "rms":
            scale[1:] /= math.sqrt(2.0)
            if n % 2 == 0:
                scale[-1] *= math.sqrt(2.0)
        self.scale = scale[:self.n_keep]
        self.keep_rows = keep_rows
        self.power = np.zeros(self.n_keep)
        self.rows: list[np.ndarray] = []
        self.centres: list[np.ndarray] = []
        self.aux: list[np.ndarray] = []
        self.count = 0
        self._buf = np.empty(0)
        self._aux_buf = np.empty(0)
        self._next = 0          # global index of self._buf[0]
        # Streaming binning: rows are summed on power into bins of a key (e.g. rpm) instead of
        # being kept, so a long record's map costs (bins x orders), not (blocks x orders).
        self.bin_edges = None if bin_edges is None else np.asarray(bin_edges, dtype=np.float64)
        self.bin_key = bin_key
        if self.bin_edges is not None:
            nb = len(self.bin_edges) - 1
            self.bin_power = np.zeros((nb, self.n_keep))
            self.bin_count = np.zeros(nb, dtype=np.int64)

    def feed(self, data: np.ndarray, aux: np.ndarray | None = None) -> None:
        buf = np.concatenate((self._buf, data)) if len(self._buf) else np.asarray(data)
        if aux is not None:
            abuf = np.concatenate((self._aux_buf, aux)) if len(self._aux_buf) else aux
        n, hop = self.n, self.hop
        n_frames = 0 if len(buf) < n else (len(buf) - n) // hop + 1
        if n_frames:
            frames = sliding_window_view(buf, n)[::hop][:n_frames]
            starts = np.arange(n_frames) * hop
            centres = self._next + starts + (n - 1) / 2.0
            frame_aux = None
            if aux is not None:
                lo = starts + (n - 1) // 2
                hi = starts + n // 2
                frame_aux = 0.5 * (abuf[lo] + abuf[hi])
            bins = None
            if self.bin_edges is not None:
                key = self.bin_key(centres, frame_aux)
                bins = np.searchsorted(self.bin_edges, key, side="right") - 1
                bins[key == self.bin_edges[-1]] = len(self.bin_edges) - 2
                bins[~np.isfinite(key)] = -1
            for b0 in range(0, n_frames, _FRAMES_PER_BATCH):
                fr = frames[b0:b0 + _FRAMES_PER_BATCH] * self.w
                amp = np.abs(sfft.rfft(fr, axis=1)[:, :self.n_keep])
                amp *= self.scale
                self.power += np.einsum("ij,ij->j", amp, amp)
                if bins is not None:
                    idx = bins[b0:b0 + _FRAMES_PER_BATCH]
                    ok = (idx >= 0) & (idx < len(self.bin_count))
                    _add_rows(self.bin_power, self.bin_count, idx[ok], amp[ok])
                elif self.keep_rows:
                    self.rows.append(amp)
            self.centres.append(centres)
            if frame_aux is not None:
                self.aux.append(frame_aux)
            self.count += n_frames
        used = n_frames * hop
        self._buf = np.array(buf[used:]) if used < len(buf) else np.empty(0)
        if aux is not None:
            self._aux_buf = np.array(abuf[used:]) if used < len(abuf) else np.empty(0)
        self._next += used

    def restart(self, index: int) -> None:
        """Drop the partial block; the stream goes on at global sample ``index``."""
        self._buf = np.empty(0)
        self._aux_buf = np.empty(0)
        self._next = index

    def mean_amplitude(self) -> np.ndarray:
        return np.sqrt(self.power / max(self.count, 1))

    def binned_rows(self) -> tuple[np.ndarray, np.ndarray]:
        """(amplitude per bin, NaN where empty; blocks per bin) of a binned stream."""
        with np.errstate(invalid="ignore", divide="ignore"):
            amp = np.sqrt(self.bin_power / self.bin_count[:, None])
        amp[self.bin_count == 0] = np.nan
        return amp, self.bin_count.copy()

    def all_rows(self) -> np.ndarray:
        return np.concatenate(self.rows) if self.rows else np.empty((0, self.n_keep))

    def all_centres(self) -> np.ndarray:
        return np.concatenate(self.centres) if self.centres else np.empty(0)

    def all_aux(self) -> np.ndarray:
        return np.concatenate(self.aux) if self.aux else np.empty(0)


def _revs_per_block(revs_per_block, order_resolution, samples_per_rev: int) -> tuple[float, int]:
    """Block length in revolutions and samples from either setting (warn when adjusted)."""
    if revs_per_block is not None and order_resolution is not None:
        rpb = checks.real(None, "revs_per_block", revs_per_block)
        res = checks.real(None, "order_resolution", order_resolution)
        if res <= 0 or abs(rpb * res - 1) > 1e-9:
            raise InputError(f"revs_per_block {rpb:g} and order_resolution {res:g} disagree; "
                             "allowed: give one of them (order_resolution = 1 / revs_per_block)")
    elif order_resolution is not None:
        res = checks.real(None, "order_resolution", order_resolution)
        if res <= 0:
            raise InputError(f"order_resolution = {show(res)}: must be a number > 0 "
                             "(orders)")
        rpb = 1.0 / res
    elif revs_per_block is not None:
        rpb = checks.real(None, "revs_per_block", revs_per_block)
    else:
        rpb = float(DEFAULT_REVS_PER_BLOCK)
    if rpb <= 0:
        raise InputError(f"revs_per_block = {show(rpb)}: must be a number > 0")
    n = round(rpb * samples_per_rev)
    if n < 8:
        raise InputError(f"revs_per_block {rpb:g} gives {n} samples per block at "
                         f"{samples_per_rev} samples/rev; allowed: at least 8 samples")
    if abs(n - rpb * samples_per_rev) > 1e-6:
        warnings.warn(f"revs_per_block {rpb:g} x {samples_per_rev} samples/rev is not a whole "
                      f"number of samples; adjusted to {n / samples_per_rev:g} revs per block",
                      FoldlineWarning, stacklevel=4)
    return n / samples_per_rev, n


class OrderAnalysis:
    """Accumulate order spectrum and order map from consecutive angle-domain pieces.

    Parameters
    ----------
    revs_per_block : float, optional
        Revolutions per FFT block (order resolution = 1 / revs_per_block).  Default 32.
    order_resolution : float, optional
        Alternative to ``revs_per_block``.
    window : str or tuple
        FFT window (scipy.signal.get_window name); default ``"hann"``.
    overlap : float
        Block overlap, 0 <= overlap < 1; default 0.5.
    scaling : {"peak", "rms"}
    max_order : float, optional
        Keep bins up to this order only (saves memory in long maps).
    keep_map : bool
        Keep every block's spectrum (needed for :meth:`order_map`).
    rpm_bins : array_like, optional
        Increasing rpm bin edges: block spectra are averaged on power into these bins as they
        arrive, instead of being kept one by one, so the map of a long record costs
        ``bins x orders`` memory.  :meth:`order_map` then returns the binned map.

    Examples
    --------
    >>> import numpy as np
    >>> spr = 64
    >>> revs = np.arange(64 * 100) / spr
    >>> sig = AngleSignal(np.cos(2 * np.pi * 5 * revs), spr, 0.0, np.full(len(revs), 900.0))
    >>> acc = OrderAnalysis(revs_per_block=10)
    >>> for i in range(0, len(revs), 1000):              # pieces of any length
    ...     acc.feed(AngleSignal(sig.data[i:i + 1000], spr, i / spr, sig.rpm[i:i + 1000]))
    >>> s = acc.spectrum()
    >>> float(s.order[np.argmax(s.amplitude)]), round(float(s.amplitude.max()), 9)
    (5.0, 1.0)
    """

    def __init__(self, *, revs_per_block=None, order_resolution=None, window="hann",
                 overlap: float = 0.5, scaling: str = "peak", max_order: float | None = None,
                 keep_map: bool = True, rpm_bins=None):
        self._overlap = _check_options(window, overlap, scaling)
        self._stream_edges = None
        if rpm_bins is not None:
            if isinstance(rpm_bins, Integral) and not isinstance(rpm_bins, bool):
                raise InputError("rpm_bins for a streamed map must be bin edges (rpm): the speed "
                                 "range is not known before the stream ends")
            self._stream_edges = _rpm_edges(rpm_bins, np.empty(0))
        self._window = window
        _window(window, 8)
        self._scaling = scaling
        if max_order is not None:
            max_order = checks.real(None, "max_order", max_order)
            if max_order <= 0:
                raise InputError(f"max_order = {show(max_order)}: must be > 0")
        self._max_order = max_order
        self._rpb_args = (revs_per_block, order_resolution)
        self._keep_map = bool(keep_map)
        self._blocks: _Blocks | None = None
        self._spr: int | None = None
        self._revs_next: float | None = None
        self._revs0 = 0.0
        self.log: tuple[str, ...] = ()

    def feed(self, sig: AngleSignal) -> None:
        """Add the next angle-domain piece: it follows the previous one, or starts after a
        gap in the angle (blocks then start afresh: none spans the gap)."""
        if not isinstance(sig, AngleSignal):
            raise InputError(f"piece = {show(sig)}: must be "
                             "AngleSignal pieces (from resample_to_angle / iter_resample_to_angle)")
        if self._blocks is None:
            self._spr = sig.samples_per_rev
            rpb, n = _revs_per_block(*self._rpb_args, self._spr)
            hop = max(1, round(n * (1 - self._overlap)))
            n_keep = None if self._max_order is None else \
                int(math.floor(self._max_order * rpb + 1e-9)) + 1
            self._rpb = rpb
            self._blocks = _Blocks(n, hop, self._window, self._scaling, n_keep, self._keep_map,
                                   bin_edges=self._stream_edges,
                                   bin_key=lambda centres, rpm: rpm)
            self._revs0 = sig.revs_start
            self._revs_next = sig.revs_start
        elif sig.samples_per_rev != self._spr or \
                (sig.revs_start - self._revs_next) * self._spr < -1e-6:
            raise InputError(f"angle pieces are not consecutive: expected a piece at "
                             f"{self._revs_next:.6f} rev with {self._spr} samples/rev, got "
                             f"{sig.revs_start:.6f} rev with {sig.samples_per_rev}")
        elif (sig.revs_start - self._revs_next) * self._spr > 1e-6:
            # A gap in the angle (the speed was unknown there): blocks start afresh after it.
            self._blocks.restart(int(round((sig.revs_start - self._revs0) * self._spr)))
        self._blocks.feed(sig.data, sig.rpm)
        self._revs_next = sig.revs_start + sig.n_samples / self._spr
        if sig.log:
            self.log = sig.log

    def _done(self) -> _Blocks:
        b = self._blocks
        if b is None or b.count == 0:
            have = 0.0 if self._revs_next is None else self._revs_next - self._revs0
            need = "" if self._blocks is None else f" of {self._rpb:g} rev"
            raise InputError(f"the angle signal holds {have:g} rev, less than one block{need}; "
                             "use a smaller revs_per_block (coarser order resolution) or a "
                             "longer record")
        return b

    def spectrum(self) -> OrderSpectrum:
        """Averaged order spectrum of everything fed so far."""
        b = self._done()
        order = np.arange(b.n_keep) / self._rpb
        return OrderSpectrum(order, b.mean_amplitude(), self._rpb, b.count, self._window,
                             self._scaling, b.enbw, self._spr)

    def order_map(self, rpm_bins=None) -> OrderMap:
        """Order map of everything fed so far (one row per block, or per rpm bin).

        Parameters
        ----------
        rpm_bins : int or array_like, optional
            Bin the rows by speed: a number of equal-width bins between the lowest and highest
            block speed, or increasing bin edges (rpm).  Rows in a bin are averaged on power.
        """
        b = self._done()
        if not self._keep_map:
            raise InputError("this OrderAnalysis was made with keep_map=False; it holds no map")
        if self._stream_edges is not None:
            if rpm_bins is not None:
                raise InputError("this OrderAnalysis bins its map as it streams (rpm_bins given "
                                 "when it was made); call order_map() without rpm_bins")
            amp, counts = b.binned_rows()
            edges = self._stream_edges
            return OrderMap(0.5 * (edges[:-1] + edges[1:]), np.arange(b.n_keep) / self._rpb, amp,
                            np.full(len(counts), np.nan), counts, revs_per_block=self._rpb,
                            window=str(self._window), scaling=self._scaling, enbw_bins=b.enbw)
        rows = b.all_rows()
        rpm = b.all_aux()
        revs = self._revs0 + b.all_centres() / self._spr
        order = np.arange(b.n_keep) / self._rpb
        common = dict(revs_per_block=self._rpb, window=str(self._window),
                      scaling=self._scaling, enbw_bins=b.enbw)
        if rpm_bins is None:
            return OrderMap(rpm, order, rows, revs, np.ones(len(rpm), np.int64), **common)
        edges = _rpm_edges(rpm_bins, rpm)
        idx = np.searchsorted(edges, rpm, side="right") - 1
        idx[rpm == edges[-1]] = len(edges) - 2
        ok = (idx >= 0) & (idx < len(edges) - 1)
        nbin = len(edges) - 1
        counts = np.bincount(idx[ok], minlength=nbin)
        power = np.zeros((nbin, b.n_keep))
        np.add.at(power, idx[ok], rows[ok] ** 2)
        with np.errstate(invalid="ignore", divide="ignore"):
            amp = np.sqrt(power / counts[:, None])
        amp[counts == 0] = np.nan
        centres = 0.5 * (edges[:-1] + edges[1:])
        return OrderMap(centres, order, amp, np.full(nbin, np.nan), counts, **common)


def _rpm_edges(rpm_bins, rpm: np.ndarray) -> np.ndarray:
    if isinstance(rpm_bins, Integral) and not isinstance(rpm_bins, bool):
        if rpm_bins < 1:
            raise InputError(f"rpm_bins = {show(rpm_bins)}: must be a count >= 1 or "
                             "increasing bin edges (rpm)")
        lo, hi = float(rpm.min()), float(rpm.max())
        if hi == lo:
            hi = lo + 1.0
        return np.linspace(lo, hi, int(rpm_bins) + 1)
    edges = np.asarray(rpm_bins, dtype=np.float64)
    if edges.ndim != 1 or len(edges) < 2 or not np.all(np.diff(edges) > 0) or \
            not np.isfinite(edges).all():
        raise InputError(f"rpm_bins = {show(rpm_bins)}: must be a count >= 1 or at "
                         "least two strictly increasing bin edges (rpm)")
    return edges


def _pieces(sig):
    if isinstance(sig, AngleSignal):
        return (sig,)
    if isinstance(sig, Iterable) and not isinstance(sig, (str, bytes, np.ndarray)):
        return sig
    raise InputError(f"signal = {show(sig)}: must be an "
                     "AngleSignal or an iterable of consecutive AngleSignal pieces")


def order_spectrum(sig, *, revs_per_block=None, order_resolution=None, window="hann",
                   overlap: float = 0.5, scaling: str = "peak",
                   max_order: float | None = None) -> OrderSpectrum:
    """Averaged, amplitude-corrected order spectrum of an angle-domain signal.

    Parameters
    ----------
    sig : AngleSignal or iterable of AngleSignal
        The tracked signal, whole or as consecutive pieces (e.g. from
        :func:`~workbench.angle.tracking.iter_resample_to_angle`).
    revs_per_block : float, optional
        Revolutions per block (order resolution 1 / revs_per_block); default 32.
    order_resolution : float, optional
        Alternative to ``revs_per_block``.
    window : str or tuple
        Window name for :func:`scipy.signal.get_window` (periodic); default Hann.
    overlap : float
        Block overlap fraction, default 0.5.
    scaling : {"peak", "rms"}
        Peak amplitude (a sinusoid of amplitude A at a bin shows A) or RMS (A / sqrt 2).
    max_order : float, optional
        Highest order kept.

    Returns
    -------
    OrderSpectrum

    Notes
    -----
    Each block is multiplied by the window, transformed, and scaled by ``2 / sum(w)`` (the
    inverse of the coherent gain: 2 for Hann); blocks are averaged on power.  Bin ``k`` is
    order ``k / revs_per_block``.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.
    .. [2] G. Heinzel, A. Ruediger and R. Schilling, "Spectrum and spectral density estimation
       by the Discrete Fourier transform (DFT)", AEI, 2002.

    Examples
    --------
    >>> import numpy as np
    >>> spr = 32
    >>> revs = np.arange(spr * 64) / spr
    >>> sig = AngleSignal(3.0 * np.sin(2 * np.pi * 4.5 * revs), spr, 0.0, np.full(len(revs), 600.0))
    >>> s = order_spectrum(sig, revs_per_block=8)
    >>> float(s.order[np.argmax(s.amplitude)]), round(float(s.amplitude.max()), 6)
    (4.5, 3.0)
    """
    acc = OrderAnalysis(revs_per_block=revs_per_block, order_resolution=order_resolution,
                        window=window, overlap=overlap, scaling=scaling, max_order=max_order,
                        keep_map=False)
    for piece in _pieces(sig):
        acc.feed(piece)
    return acc.spectrum()


def order_map(sig, *, revs_per_block=None, order_resolution=None, window="hann",
              overlap: float = 0.5, scaling: str = "peak", max_order: float | None = None,
              rpm_bins=None) -> OrderMap:
    """Order spectra against speed (a Campbell diagram in orders), one per block.

    Parameters
    ----------
    sig : AngleSignal or iterable of AngleSignal
        The tracked signal, whole or as consecutive pieces.
    revs_per_block, order_resolution, window, overlap, scaling, max_order
        As for :func:`order_spectrum`.
    rpm_bins : int or array_like, optional
        Average rows (on power) in rpm bins: a count of equal bins, or bin edges (rpm).

    Returns
    -------
    OrderMap
        ``rpm`` at each block centre (the speed at the centre sample), ``order``,
        ``amplitude`` (n_rows, n_orders).

    Examples
    --------
    >>> import numpy as np
    >>> spr = 32
    >>> revs = np.arange(spr * 64) / spr
    >>> sig = AngleSignal(np.cos(2 * np.pi * 2 * revs), spr, 0.0, 600 + 10 * revs)
    >>> m = order_map(sig, revs_per_block=8, overlap=0.0)
    >>> m.amplitude.shape, m.rpm[:2].tolist()
    ((8, 129), [639.84375, 719.84375])
    """
    acc = OrderAnalysis(revs_per_block=revs_per_block, order_resolution=order_resolution,
                        window=window, overlap=overlap, scaling=scaling, max_order=max_order,
                        keep_map=True)
    for piece in _pieces(sig):
        acc.feed(piece)
    return acc.order_map(rpm_bins)


def order_cut(source, order: float, *, bandwidth_orders: float | None = None,
              **map_options) -> OrderCut:
    """Amplitude of one order against speed, summed over a band of bins.

    Parameters
    ----------
    source : OrderMap, or AngleSignal / iterable of pieces
        A map, or a signal to make one from (``map_options`` go to :func:`order_map`).
    order : float
        The order to follow (> 0).
    bandwidth_orders : float, optional
        Width of the band summed, centred on ``order`` (orders).  Default: 4 bins (the Hann
        main lobe), i.e. ``4 / revs_per_block``.

    Returns
    -------
    OrderCut

    Notes
    -----
    The amplitude is the energy sum over the bins whose order lies within
    ``order +- bandwidth_orders / 2``, corrected for the window's equivalent noise bandwidth:
    ``A = sqrt(sum(A_k^2) / ENBW)``.  A sinusoid of amplitude A, window-corrected, puts
    ``A^2 x ENBW`` into its bins (Parseval), so the sum gives A back wherever the tone lies
    between bins, once the band holds the window's main lobe.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.
    """
    omap = source if isinstance(source, OrderMap) else order_map(source, **map_options)
    if isinstance(source, OrderMap) and map_options:
        raise InputError(f"options {sorted(map_options)} apply only when a signal is given; "
                         "this is already an OrderMap")
    order = checks.real(None, "order", order)
    if order <= 0:
        raise InputError(f"order = {show(order)}: must be an order > 0")
    res = omap.order_resolution
    if bandwidth_orders is None:
        bandwidth_orders = 4.0 * res
    bandwidth_orders = checks.real(None, "bandwidth_orders", bandwidth_orders)
    if bandwidth_orders < res:
        raise InputError(f"bandwidth_orders {bandwidth_orders:g} is narrower than one bin "
                         f"({res:g} orders); allowed: at least the order resolution")
    sel = np.abs(omap.order - order) <= 0.5 * bandwidth_orders + 1e-9 * res
    if not sel.any() or order + 0.5 * bandwidth_orders > omap.order[-1] + res:
        raise InputError(f"order {order:g} +- {bandwidth_orders / 2:g} lies outside the map's "
                         f"orders 0 .. {omap.order[-1]:g}")
    a = omap.amplitude[:, sel]
    amp = np.sqrt(np.sum(a * a, axis=1) / omap.enbw_bins)
    return OrderCut(omap.rpm, amp, order, bandwidth_orders)


def envelope_order_spectrum(x, rate_hz: float, angle: ShaftAngle, *, band_hz,
                            samples_per_rev: int = 64, filter_order: int = 4,
                            revs_per_block=None, order_resolution=None, window="hann",
                            overlap: float = 0.5, scaling: str = "peak",
                            protect: bool = True) -> OrderSpectrum:
    """Order spectrum of the envelope of a band (bearing and gear fault lines).

    The channel is band-pass filtered in time (Butterworth, applied forward and backward so
    the band has no phase shift), its Hilbert envelope is taken, the envelope's mean removed,
    and the envelope is order-tracked and its order spectrum computed.  Fault impacts that
    excite a resonance in the band repeat once per defect passage; their envelope shows the
    defect order and harmonics.

    Parameters
    ----------
    x : array_like, shape (n,)
        The channel (whole: the forward-backward filter and the Hilbert transform need it).
    rate_hz : float
        Sample rate (Hz).
    angle : ShaftAngle
        Shaft angle (a tacho fit, or ``ShaftAngle.from_rpm`` at a known speed).
    band_hz : (float, float)
        Band (Hz), 0 < lo < hi < rate_hz / 2.
    samples_per_rev : int
        Angle-domain samples per revolution of the envelope; default 64 (orders to 25.6).
    filter_order : int
        Butterworth order of the band-pass (the forward-backward pass doubles the slope).
    revs_per_block, order_resolution, window, overlap, scaling
        As for :func:`order_spectrum`.
    protect : bool
        Alias protection of the tracking (see :func:`~workbench.angle.tracking.resample_to_angle`).

    Returns
    -------
    OrderSpectrum

    References
    ----------
    .. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A tutorial",
       Mechanical Systems and Signal Processing 25(2):485-520, 2011.
    """
    rate_hz = checks.rate_hz(None, "rate_hz", rate_hz)
    xa = one_d(x, "x")
    try:
        lo, hi = (checks.real(None, "band_hz", v) for v in band_hz)
    except TypeError:
        raise InputError(f"band_hz = {show(band_hz)}: must be two frequencies (lo, hi) "
                         "in Hz") from None
    if not 0 < lo < hi < rate_hz / 2:
        raise InputError(f"band_hz = [{lo:g}, {hi:g}]: must be 0 < lo < hi < "
                         f"rate/2 = {rate_hz / 2:g} Hz")
    filter_order = checks.positive_int(None, "filter_order", filter_order, whole_float=False)
    if len(xa) < 64:
        raise InputError(f"x has {len(xa)} samples; allowed: at least 64")
    from scipy.signal import butter, hilbert, sosfiltfilt   # only on request: a second to import

    sos = butter(filter_order, (lo, hi), btype="bandpass", fs=rate_hz, output="sos")
    band = sosfiltfilt(sos, xa)
    env = np.abs(hilbert(band, sfft.next_fast_len(len(band)))[:len(band)])
    env -= env.mean()
    sig = iter_resample_to_angle(env, rate_hz, angle, samples_per_rev=samples_per_rev,
                           protect=protect)     # pieces: an angle with gaps is fine
    return order_spectrum(sig, revs_per_block=revs_per_block, order_resolution=order_resolution,
                          window=window, overlap=overlap, scaling=scaling)


def frequency_map(x, rate_hz: float, angle: ShaftAngle, *, nperseg: int = 4096,
                      overlap: float = 0.5, window="hann", scaling: str = "peak",
                      max_hz: float | None = None, rpm_bins=None) -> FrequencyMap:
    """Spectra of fixed-length time blocks against speed (no angle resampling).

    Parameters
    ----------
    x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The channel, sampled from time 0.
    rate_hz : float
        Sample rate (Hz).
    angle : ShaftAngle
        Gives the speed at each block centre; blocks centred outside its span are dropped.
    nperseg : int
        Samples per block (>= 8).
    overlap, window, scaling
        As for :func:`order_spectrum`.
    max_hz : float, optional
        Highest frequency kept.
    rpm_bins : int or array_like, optional
        Average the blocks on power into rpm bins as they stream (a count of equal bins over
        the shaft angle's speed range, or bin edges): memory ``bins x frequencies`` instead of
        ``blocks x frequencies``; ``time_s`` is then NaN.

    Returns
    -------
    FrequencyMap

    Notes
    -----
    During a sweep, order k moves ``k x (d f_rot / dt) x T`` Hz within a block of ``T``
    seconds, i.e. ``k (d f_rot/dt) T^2`` bins: the smearing that order tracking removes.
    """
    rate_hz = checks.rate_hz(None, "rate_hz", rate_hz)
    if not isinstance(angle, ShaftAngle):
        raise InputError(f"angle = {show(angle)}: must be a "
                         "ShaftAngle")
    nperseg = checks.positive_int(None, "nperseg", nperseg, low=8, whole_float=False)
    overlap = _check_options(window, overlap, scaling)
    n_keep = None
    if max_hz is not None:
        max_hz = checks.real(None, "max_hz", max_hz)
        if max_hz <= 0:
            raise InputError(f"max_hz = {show(max_hz)}: must be > 0 Hz")
        n_keep = int(math.floor(max_hz * nperseg / rate_hz + 1e-9)) + 1
    hop = max(1, round(nperseg * (1 - overlap)))
    edges = None
    if rpm_bins is not None:
        span = np.array([angle.rpm_min, angle.rpm_max])
        edges = _rpm_edges(rpm_bins, span)
    blocks = _Blocks(nperseg, hop, window, scaling, n_keep, True, bin_edges=edges,
                     bin_key=lambda centres, _aux: angle.rpm_at(centres / rate_hz))
    for chunk in iter_chunks(x, "x"):
        blocks.feed(chunk)
    if blocks.count == 0:
        raise InputError(f"the record is shorter than one block of {nperseg} samples")
    if edges is not None:
        amp, counts = blocks.binned_rows()
        hz = np.arange(blocks.n_keep) * rate_hz / nperseg
        ok = counts > 0
        if not ok.any():
            raise InputError(f"no block centre lies inside the shaft angle's span "
                             f"({angle.t_start_s:g} to {angle.t_end_s:g} s)")
        return FrequencyMap(0.5 * (edges[:-1] + edges[1:])[ok], hz, amp[ok],
                               np.full(int(ok.sum()), np.nan), str(window), scaling, blocks.enbw)
    t = blocks.all_centres() / rate_hz
    rpm = angle.rpm_at(t)
    ok = np.isfinite(rpm)
    if not ok.any():
        raise InputError(f"no block centre lies inside the shaft angle's span "
                         f"({angle.t_start_s:g} to {angle.t_end_s:g} s)")
    hz = np.arange(blocks.n_keep) * rate_hz / nperseg
    return FrequencyMap(rpm[ok], hz, blocks.all_rows()[ok], t[ok], str(window), scaling,
                           blocks.enbw)


def _prominent_peaks(x: np.ndarray, min_prominence: float) -> tuple[np.ndarray, np.ndarray]:
    """Local maxima of ``x`` and their topographic prominence, those of at least
    ``min_prominence``; the definitions of ``scipy.signal.find_peaks(x, prominence=...)``
    (a flat top counts once, at its middle sample, rounded down; the first and last samples
    are never peaks), in numpy, without importing scipy.signal (and with it scipy.stats).

    The prominence of a peak is its height above the higher of the two lowest points between
    it and the nearest strictly higher sample on each side (or the record's end).

    References
    ----------
    .. [1] P. Virtanen et al., "SciPy 1.0: fundamental algorithms for scientific computing in
       Python", Nature Methods 17:261-272, 2020 (``scipy.signal.peak_prominences``).
    """
    x = np.asarray(x, dtype=np.float64)
    d = np.diff(x)
    nz = np.flatnonzero(d)
    if len(nz) < 2:
        return np.empty(0, dtype=np.intp), np.empty(0)
    rise = d[nz[:-1]] > 0
    fall = d[nz[1:]] < 0
    k = np.flatnonzero(rise & fall)
    left_edge = nz[k] + 1          # first sample of the (possibly flat) top
    right_edge = nz[k + 1]         # last sample of it
    peaks = (left_edge + right_edge) // 2
    if len(peaks) == 0:
        return peaks, np.empty(0)
    n = len(x)
    # Range maxima and minima by sparse tables (level j: over 2**j samples), so the nearest
    # strictly higher sample on each side of every peak is found by a binary descent done for
    # all peaks at once, and the lowest sample in between by one range-minimum lookup.
    mx, mn = [x], [x]
    while (1 << len(mx)) <= n:
        h = 1 << (len(mx) - 1)
        mx.append(np.maximum(mx[-1][:-h], mx[-1][h:]))
        mn.append(np.minimum(mn[-1][:-h], mn[-1][h:]))
    height = x[peaks]
    left = peaks.copy()            # samples [left, peak) hold nothing above the peak
    right = peaks + 1              # samples (peak, right) hold nothing above the peak
    for j in range(len(mx) - 1, -1, -1):
        h = 1 << j
        ok = left - h >= 0
        ok[ok] = mx[j][left[ok] - h] <= height[ok]
        left[ok] -= h
        ok = right + h <= n
        ok[ok] = mx[j][right[ok]] <= height[ok]
        right[ok] += h

    def range_min(lo, hi):         # min of x[lo:hi], hi > lo
        k = np.floor(np.log2(hi - lo)).astype(np.intp)
        out = np.empty(len(lo))
        for j in np.unique(k):
            sel = k == j
            out[sel] = np.minimum(mn[j][lo[sel]], mn[j][hi[sel] - (1 << j)])
        return out

    left_min = range_min(left, peaks + 1)
    right_min = range_min(peaks, right)
    prom = height - np.maximum(left_min, right_min)
    keep = prom >= min_prominence
    return peaks[keep], prom[keep]
def peak_amplitude(bin_amplitude, a_db, b_db, c_db, delta, *, window="hann", n_window=None):
    """Amplitude of a peak between bins: the estimator of :func:`find_order_peaks`.

    Parameters
    ----------
    bin_amplitude : array_like, shape (n,)
        Amplitude of each peak's bin (linear, window-corrected).
    a_db, b_db, c_db : array_like, shape (n,)
        Levels of the bin before, the peak bin and the bin after, dB.
    delta : array_like, shape (n,)
        Offset of the parabola's vertex from the peak bin, bins (-0.5 .. 0.5).
    window : str or tuple
        The FFT window of the spectrum.
    n_window : int, optional
        Samples per block; without it the parabola's vertex level is used.  For more than 64
        peaks the window's response is tabulated every 0.001 bin and interpolated (the
        response is smooth: the interpolation error is below 1e-6).

    Returns
    -------
    ndarray, shape (n,)
        The bin amplitude divided by the window's response at ``delta`` bins from its centre
        (the scalloping loss; Harris 1978), or the parabola's vertex without ``n_window``.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.
    """
    delta = np.asarray(delta, dtype=float)
    if n_window is not None:
        nwin = int(n_window)
        w = _window(window, nwin)
        m = np.arange(nwin)
        if delta.size > 64:  # many peaks (a map's ridges): tabulate the response, interpolate
            grid = np.linspace(-0.5, 0.5, 1001)
            table = np.abs(np.exp(-2j * np.pi * np.outer(grid, m) / nwin) @ w) / w.sum()
            response = np.interp(delta, grid, table)
        else:
            response = np.abs(np.exp(-2j * np.pi * np.outer(delta, m) / nwin) @ w) / w.sum()
        return np.asarray(bin_amplitude, dtype=float) / response
    a, b, c = (np.asarray(v, dtype=float) for v in (a_db, b_db, c_db))
    return 10 ** ((b - 0.25 * (a - c) * delta) / 20)


def find_order_peaks(spectrum: OrderSpectrum, *, n: int = 10, min_prominence_db: float = 6.0,
                     order_range: tuple[float, float] | None = None) -> OrderPeaks:
    """Strongest peaks of an order spectrum, refined between bins.

    Parameters
    ----------
    spectrum : OrderSpectrum
    n : int
        Most peaks returned (strongest first).
    min_prominence_db : float
        Least prominence (dB above the surrounding floor, as :func:`scipy.signal.find_peaks`
        defines it; computed here in numpy).
    order_range : (float, float), optional
        Search only between these orders.

    Returns
    -------
    OrderPeaks

    Notes
    -----
    The peak bin and its two neighbours are fitted with a parabola in dB; its vertex gives
    the order between bins (quadratic interpolation of spectral peaks; for a Hann window the
    order error is below 0.02 bin).  The amplitude is the peak bin's, divided by the window's
    own response at that offset from the bin centre (the scalloping loss, computed from the
    window; Harris 1978), which the parabola alone overestimates by up to 0.3 dB for Hann.

    References
    ----------
    .. [1] J. O. Smith and X. Serra, "PARSHL: An analysis/synthesis program for non-harmonic
       sounds based on a sinusoidal representation", Proc. International Computer Music
       Conference, 1987.
    .. [2] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.
    """
    if not isinstance(spectrum, OrderSpectrum):
        raise InputError(f"spectrum = {show(spectrum)}: must be an "
                         "OrderSpectrum")
    n = checks.positive_int(None, "n", n, whole_float=False)
    min_prominence_db = checks.real(None, "min_prominence_db", min_prominence_db)
    if min_prominence_db < 0:
        raise InputError(f"min_prominence_db = {show(min_prominence_db)}: must be >= 0")
    order, amp = spectrum.order, spectrum.amplitude
    lo_i, hi_i = 0, len(order)
    if order_range is not None:
        try:
            lo, hi = (checks.real(None, "order_range", v) for v in order_range)
        except TypeError:
            raise InputError(f"order_range = {show(order_range)}: must be (lo, hi) "
                             "orders") from None
        if not lo < hi:
            raise InputError(f"order_range = [{lo:g}, {hi:g}]: must be lo < hi")
        lo_i = int(np.searchsorted(order, lo, side="left"))
        hi_i = int(np.searchsorted(order, hi, side="right"))
    floor = np.finfo(np.float64).tiny
    db = 20 * np.log10(np.maximum(amp, floor))
    seg = db[lo_i:hi_i]
    idx, prom = _prominent_peaks(seg, min_prominence_db)
    if len(idx) == 0:
        return OrderPeaks(np.empty(0), np.empty(0), np.empty(0))
    idx = idx + lo_i
    a, b, c = db[idx - 1], db[idx], db[idx + 1]
    den = a - 2 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        delta = np.where(den != 0, 0.5 * (a - c) / den, 0.0)
    delta = np.clip(delta, -0.5, 0.5)
    step = order[1] - order[0]
    orders = order[idx] + delta * step
    nwin = None if spectrum.samples_per_rev is None else round(spectrum.revs_per_block * spectrum.samples_per_rev)
    amps = peak_amplitude(amp[idx], a, b, c, delta, window=spectrum.window, n_window=nwin)
    top = np.argsort(-amps, kind="stable")[:n]
    return OrderPeaks(orders[top], amps[top], prom[top])
