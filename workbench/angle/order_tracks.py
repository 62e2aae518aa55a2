"""Order tracks with phase, and the critical speeds they show.

An **order track** is one order's complex amplitude (level and phase) against speed.  It is
computed from the angle-domain signal (:class:`~workbench.angle.tracking.AngleSignal`, whole or
streamed in pieces) block by block, with the same window and amplitude conventions as the
order spectra of :mod:`workbench.angle.spectra`: each block of ``revs_per_block`` revolutions
is multiplied by the window (Hann by default) and the order's Fourier coefficient is taken at
exactly order ``k`` (not at the nearest FFT bin), scaled by ``2 / sum(w)``, so a sinusoid of
amplitude A at order k reads A wherever k lies between bins.  The block's speed is the mean
speed over its samples.

Phase
-----
The phase is the **phase lag**: how far the shaft turns from the once-per-revolution reference
(angle 0 of the :class:`~workbench.angle.shaft_angle.ShaftAngle`: the leading edge of a 1-pulse-per-
rev tacho, or the first tooth after the gap of a missing-tooth wheel) to the next positive
peak of the order's component, in degrees of the order's own cycle, 0 to 360 (common practice,
no source).  For order 1 that is degrees of shaft rotation; for order k it is k times the
shaft rotation to the next peak, so every order's lag spans 0-360 and a resonance turns it by
180 degrees whatever the order.  With ``x(theta) = A cos(2 pi k theta - phi)`` (theta in
revolutions) the lag is ``phi``.  An ``offset_deg`` is added to every lag (modulo 360), to refer
it to another mark, e.g. the angle between the reference mark and the vibration sensor.

Without a once-per-rev reference (a multi-tooth wheel without gap, a speed table, a constant
speed) angle 0 is just where the record's angle starts: the phase is **relative** (consistent
within the run, so phase changes still count, but not comparable with another run), and the
result says so (:attr:`OrderTrack.absolute_phase` is False).  A non-integer order has no fixed
phase to a once-per-rev mark, so its phase is relative too.

Critical speeds
---------------
:func:`find_criticals` finds the resonance peaks of a track and keeps those that behave like
a single-degree-of-freedom mode: the half-power (-3 dB) speeds ``N1 < N2`` around the peak
``Nc`` give the amplification factor ``AF = Nc / (N2 - N1)`` (API 684, from memory); the phase
lag must rise through the peak by about 90 degrees between the half-power speeds (an isolated
mode: atan2 gives 45 and 135 degrees there), and the peak's shape must match the single-degree-
of-freedom curve with the same Nc and damping ratio ``1 / (2 AF)``.  A step (no fall on one
side), a folded line passing through the order (a bump whose phase does not turn) and noise
(too narrow to resolve, shape or phase wrong) are listed as rejected, with the reason.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
   transform", Proceedings of the IEEE 66(1):51-83, 1978.
.. [2] American Petroleum Institute, API Recommended Practice 684, "Tutorial on the API
   Standard Paragraphs Covering Rotor Dynamics and Balancing", 2nd ed., 2005 (amplification
   factor by the half-power method, separation margins; from memory).
.. [3] S. S. Rao, "Mechanical Vibrations", 5th ed., Prentice Hall, 2011, section 3.7
   (response of a rotating unbalanced system, single degree of freedom).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy.signal import find_peaks, get_window

from workbench import checks
from workbench.checks import show
from workbench.angle.spectra import _check_options, _frozen, _pieces
from workbench.angle.tracking import AngleSignal
from workbench.errors import FoldlineWarning, InputError
from workbench.sampling.resonance import (PEAK_LOSS_LIMIT_DB, fastest_sweep_rpm_per_s,
                                          passage_loss_db)

__all__ = ["OrderTrack", "CriticalSpeed", "RejectedPeak", "CriticalSearch", "order_tracks",
           "find_criticals", "find_track_criticals", "separation_margin_pct", "required_margin_pct", "sdof_unbalance",
           "DEFAULT_TRACK_ORDERS", "DEFAULT_TRACK_REVS_PER_BLOCK"]

#: Orders tracked when none are chosen.
DEFAULT_TRACK_ORDERS = (1.0, 2.0)
#: Revolutions per block of an order track: short blocks follow a run-up closely (a block
#: spans revs_per_block / (rpm / 60) seconds); 8 revolutions still separate orders 1 and 2 by
#: 8 bins of the Hann window.
DEFAULT_TRACK_REVS_PER_BLOCK = 8.0


@dataclass(frozen=True, eq=False)
class OrderTrack:
    """One order's amplitude and phase lag against speed.

    Attributes
    ----------
    order : float
        The order tracked (multiple of the reference shaft speed).
    rpm : ndarray, shape (n,)
        Mean speed over each block (rpm), in block order (time order).
    revs : ndarray, shape (n,)
        Shaft angle at each block's centre (rev).
    amplitude : ndarray, shape (n,)
        Peak amplitude of the order (channel units; window-corrected).
    phase_deg : ndarray, shape (n,)
        Phase lag, 0 <= lag < 360 degrees of the order's cycle (see the module notes), with
        ``offset_deg`` added.
    absolute_phase : bool
        True when angle 0 is a once-per-rev reference and the order is whole: the lag is
        measured from the reference; False: relative to the start of the record's angle.
    offset_deg : float
        Offset added to every lag (degrees).
    revs_per_block : float
    window : str
    """

    order: float
    rpm: np.ndarray
    revs: np.ndarray
    amplitude: np.ndarray
    phase_deg: np.ndarray
    absolute_phase: bool
    offset_deg: float = 0.0
    revs_per_block: float = DEFAULT_TRACK_REVS_PER_BLOCK
    window: str = "hann"

    def __post_init__(self):
        for name in ("rpm", "revs", "amplitude", "phase_deg"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))
        n = len(self.rpm)
        if any(getattr(self, k).shape != (n,) for k in ("revs", "amplitude", "phase_deg")):
            raise InputError("OrderTrack: rpm, revs, amplitude and phase_deg must be 1-D arrays "
                             "of the same length")

    @property
    def phase_reference(self) -> str:
        """``"absolute"`` (from the once-per-rev reference) or ``"relative"``."""
        return "absolute" if self.absolute_phase else "relative"

    @property
    def complex_amplitude(self) -> np.ndarray:
        """``amplitude x exp(-i lag)``: the vector of a polar plot, shape (n,)."""
        return self.amplitude * np.exp(-1j * np.deg2rad(self.phase_deg))

    def sorted_by_rpm(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(rpm, amplitude, unwrapped lag in degrees) sorted by rising speed.

        The lag is unwrapped along the speed (steps of more than 180 degrees between
        neighbours are taken as a wrap), starting in [0, 360).
        """
        k = np.argsort(self.rpm, kind="stable")
        lag = np.rad2deg(np.unwrap(np.deg2rad(self.phase_deg[k])))
        return self.rpm[k], self.amplitude[k], lag


class _TrackBlocks:
    """Per-block complex amplitudes at chosen orders of a stream of angle-domain pieces."""

    def __init__(self, orders, n: int, hop: int, window, spr: int, revs0: float):
        self.orders = np.asarray(orders, dtype=np.float64)
        self.n, self.hop, self.spr = n, hop, spr
        self.w = np.asarray(get_window(window, n, fftbins=True), dtype=np.float64)
        self.scale = 2.0 / float(self.w.sum())
        m = np.arange(n)
        # kernel[k, m] = w[m] exp(-2 pi i order_k m / spr)
        self.kernel = self.w[None, :] * np.exp(
            -2j * np.pi * np.mod(np.outer(self.orders, m) / spr, 1.0))
        self.revs0 = revs0
        self._buf = np.empty(0)
        self._rbuf = np.empty(0)
        self._next = 0
        self.coef: list[np.ndarray] = []
        self.rpm: list[np.ndarray] = []
        self.centre: list[np.ndarray] = []

    def feed(self, data: np.ndarray, rpm: np.ndarray) -> None:
        buf = np.concatenate((self._buf, data)) if len(self._buf) else np.asarray(data)
        rbuf = np.concatenate((self._rbuf, rpm)) if len(self._rbuf) else np.asarray(rpm)
        n, hop = self.n, self.hop
        n_frames = 0 if len(buf) < n else (len(buf) - n) // hop + 1
        if n_frames:
            from numpy.lib.stride_tricks import sliding_window_view

            frames = sliding_window_view(buf, n)[::hop][:n_frames]
            rframes = sliding_window_view(rbuf, n)[::hop][:n_frames]
            starts = self._next + np.arange(n_frames) * hop          # global sample index
            x = frames @ self.kernel.T                                 # (frames, orders)
            # angle of each frame's first sample: revs0 + start / spr; rotate by the order's
            # phase there, computed modulo one cycle to keep precision in long records
            cyc = np.mod(np.outer(starts, self.orders) / self.spr
                         + np.mod(self.revs0 * self.orders, 1.0)[None, :], 1.0)
            x = x * np.exp(-2j * np.pi * cyc) * self.scale
            self.coef.append(x)
            self.rpm.append(rframes.mean(axis=1))
            self.centre.append(self.revs0 + (starts + (n - 1) / 2.0) / self.spr)
        used = n_frames * hop
        self._buf = np.array(buf[used:]) if used < len(buf) else np.empty(0)
        self._rbuf = np.array(rbuf[used:]) if used < len(rbuf) else np.empty(0)
        self._next += used


def _is_whole(order: float) -> bool:
    return abs(order - round(order)) < 1e-9


def order_tracks(sig, orders=DEFAULT_TRACK_ORDERS, *, once_per_rev: bool = False,
                 offset_deg: float = 0.0, revs_per_block: float | None = None,
                 window="hann", overlap: float = 0.75) -> tuple[OrderTrack, ...]:
    """Amplitude and phase lag of chosen orders against speed.

    Parameters
    ----------
    sig : AngleSignal or iterable of AngleSignal
        The tracked signal, whole or as consecutive pieces (e.g. from
        :func:`~workbench.angle.tracking.iter_resample_to_angle`); angle 0 of its shaft angle is the
        phase reference.
    orders : sequence of float
        Orders to track (> 0, below the order Nyquist); default 1 and 2.
    once_per_rev : bool
        True when angle 0 (and every whole revolution) is a once-per-rev reference: a
        1-pulse-per-rev tacho or a missing-tooth wheel.  False (default) marks every phase
        relative.
    offset_deg : float
        Added to every lag, modulo 360 (degrees of the order's cycle).
    revs_per_block : float, optional
        Revolutions per block; default :data:`DEFAULT_TRACK_REVS_PER_BLOCK` (8).
    window : str or tuple
        Window (:func:`scipy.signal.get_window`), default Hann.
    overlap : float
        Block overlap, 0 <= overlap < 1; default 0.75 (a smooth track).

    Returns
    -------
    tuple of OrderTrack
        One per order, in the order given.

    Notes
    -----
    For block ``j`` with samples ``x_m`` at angles ``theta_m`` (rev) the complex amplitude is
    ``c = (2 / sum w) sum_m w_m x_m exp(-2 pi i k theta_m)``; the component is
    ``Re(c exp(2 pi i k theta)) = |c| cos(2 pi k theta + arg c)``, whose positive peaks lie
    at ``2 pi k theta = -arg c (mod 2 pi)``: the lag is ``-arg c`` in degrees, modulo 360.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.

    Examples
    --------
    >>> import numpy as np
    >>> spr = 64
    >>> revs = np.arange(spr * 64) / spr
    >>> x = 2.0 * np.cos(2 * np.pi * revs - np.deg2rad(30.0))   # order 1, lag 30 degrees
    >>> tr, = order_tracks(AngleSignal(x, spr, 0.0, np.full(len(x), 600.0)), [1],
    ...                    once_per_rev=True)
    >>> round(float(tr.amplitude[0]), 9), round(float(tr.phase_deg[0]), 6), tr.phase_reference
    (2.0, 30.0, 'absolute')
    """
    try:
        orders = tuple(checks.real(None, "orders", o) for o in orders)
    except TypeError:
        raise InputError(f"orders = {show(orders)}: must be a sequence of orders > 0, "
                         "e.g. (1, 2)") from None
    if not orders or any(o <= 0 for o in orders):
        raise InputError(f"orders = {show(orders)}: must be at least one order > 0")
    offset_deg = checks.real(None, "offset_deg", offset_deg)
    overlap = _check_options(window, overlap, "peak")
    rpb = DEFAULT_TRACK_REVS_PER_BLOCK if revs_per_block is None else \
        checks.real(None, "revs_per_block", revs_per_block)
    if rpb <= 0:
        raise InputError(f"revs_per_block = {show(rpb)}: must be a number > 0")
    acc = None
    spr = None
    expect = None
    for piece in _pieces(sig):
        if not isinstance(piece, AngleSignal):
            raise InputError(f"piece = {show(piece)}: must be "
                             "AngleSignal pieces")
        if acc is None:
            spr = piece.samples_per_rev
            n = round(rpb * spr)
            if n < 8:
                raise InputError(f"revs_per_block {rpb:g} gives {n} samples per block at {spr} "
                                 "samples/rev; allowed: at least 8 samples")
            top = max(orders)
            if top >= spr / 2:
                raise InputError(f"order {top:g} is not below the order Nyquist {spr / 2:g} "
                                 f"({spr} samples/rev); allowed: orders < {spr / 2:g}, or more "
                                 "samples per rev")
            acc = _TrackBlocks(orders, n, max(1, round(n * (1 - overlap))), window, spr,
                               piece.revs_start)
        elif abs(piece.revs_start - expect) * spr > 1e-6:
            raise InputError(f"angle pieces are not consecutive: expected one at {expect:.6f} "
                             f"rev, got {piece.revs_start:.6f} rev")
        acc.feed(piece.data, piece.rpm)
        expect = piece.revs_start + piece.n_samples / spr
    if acc is None or not acc.coef:
        have = 0.0 if acc is None else acc._next / spr + len(acc._buf) / spr
        raise InputError(f"the angle signal holds {have:g} rev, less than one block of {rpb:g} "
                         "rev; use a smaller revs_per_block or a longer record")
    coef = np.concatenate(acc.coef)
    rpm = np.concatenate(acc.rpm)
    revs = np.concatenate(acc.centre)
    out = []
    for i, k in enumerate(orders):
        c = coef[:, i]
        lag = np.mod(-np.rad2deg(np.angle(c)) + offset_deg, 360.0)
        lag[lag >= 360.0] = 0.0
        out.append(OrderTrack(k, rpm, revs, np.abs(c), lag,
                              bool(once_per_rev and _is_whole(k)), offset_deg,
                              n / spr, str(window)))
    return tuple(out)


# --------------------------------------------------------------------------------------------
# Single-degree-of-freedom reference shapes
# --------------------------------------------------------------------------------------------


def sdof_unbalance(rpm, critical_rpm: float, damping_ratio: float):
    """Unbalance response of a damped single-degree-of-freedom rotor (closed form).

    Parameters
    ----------
    rpm : array_like
        Speeds (rpm).
    critical_rpm : float
        Undamped natural frequency expressed as a speed, rpm (> 0).
    damping_ratio : float
        zeta, > 0.

    Returns
    -------
    (amplitude, lag_deg) : ndarrays
        ``r^2 / sqrt((1 - r^2)^2 + (2 zeta r)^2)`` (the amplitude over the eccentricity m e / M)
        and the phase lag ``atan2(2 zeta r, 1 - r^2)`` in degrees, ``r = rpm / critical_rpm``.

    References
    ----------
    .. [1] S. S. Rao, "Mechanical Vibrations", 5th ed., Prentice Hall, 2011, section 3.7,
       eqs. (3.81)-(3.82) (rotating unbalance).
    """
    r = np.asarray(rpm, dtype=np.float64) / float(critical_rpm)
    z = float(damping_ratio)
    amp = r * r / np.sqrt((1 - r * r) ** 2 + (2 * z * r) ** 2)
    lag = np.rad2deg(np.arctan2(2 * z * r, 1 - r * r))
    return amp, lag


# --------------------------------------------------------------------------------------------
# Critical speeds
# --------------------------------------------------------------------------------------------


def separation_margin_pct(critical_rpm: float, operating_rpm) -> float:
    """Separation margin of a critical from the operating range, percent.

    ``|Nc - N| / N x 100`` with N the nearest edge of the operating range ``(lo, hi)``
    (API 684 style, from memory): below the range ``(lo - Nc) / lo``, above it
    ``(Nc - hi) / hi``.  A critical inside the range gives a negative margin:
    ``-min(Nc - lo, hi - Nc) / N x 100`` with N that nearest edge.

    Parameters
    ----------
    critical_rpm : float
    operating_rpm : (float, float)
        Lowest and highest operating speed, rpm, 0 < lo <= hi.

    Examples
    --------
    >>> separation_margin_pct(1200.0, (1500.0, 1800.0))
    20.0
    >>> round(separation_margin_pct(1890.0, (1500.0, 1800.0)), 6)
    5.0
    """
    lo, hi = _operating(operating_rpm)
    nc = float(critical_rpm)
    if nc < lo:
        return (lo - nc) / lo * 100.0
    if nc > hi:
        return (nc - hi) / hi * 100.0
    if nc - lo <= hi - nc:
        return -(nc - lo) / lo * 100.0
    return -(hi - nc) / hi * 100.0


def required_margin_pct(amplification_factor: float, critical_rpm: float, operating_rpm) -> float:
    """Separation margin API 617 / API 684 ask for, percent (from memory).

    AF < 2.5: the mode counts as critically damped and no margin is required (0).  Otherwise,
    for a critical below the operating range ``min(16, 17 (1 - 1 / (AF - 1.5)))``; above it
    ``min(26, 10 + 17 (1 - 1 / (AF - 1.5)))``; inside it, the margin below (the stricter rule
    is the machine maker's to set; this gives the usual figure only).

    References
    ----------
    .. [1] American Petroleum Institute, API Standard 617, "Axial and Centrifugal Compressors
       and Expander-compressors", 8th ed., 2014, and API RP 684, 2nd ed., 2005 (from memory).
    """
    af = float(amplification_factor)
    if not af >= 2.5:
        return 0.0
    lo, hi = _operating(operating_rpm)
    base = 17.0 * (1.0 - 1.0 / (af - 1.5))
    if float(critical_rpm) > hi:
        return min(26.0, 10.0 + base)
    return min(16.0, base)


def _operating(operating_rpm) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in operating_rpm)
    except (TypeError, ValueError):
        raise InputError(f"operating range = {show(operating_rpm)}: must be two speeds "
                         "LO,HI in rpm") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= hi):
        raise InputError(f"operating_rpm = [{lo:g}, {hi:g}]: must be "
                         "0 < LO <= HI (rpm)")
    return lo, hi


@dataclass(frozen=True)
class CriticalSpeed:
    """A resonance peak of an order track that behaves like a single mode.

    Attributes
    ----------
    order : float
        The order whose track shows it.
    rpm : float
        Speed of the peak (rpm), refined by a parabola through the three highest points.
    amplitude : float
        Peak amplitude (channel units).
    amplification_factor : float
        ``rpm / (upper - lower half-power speed)`` (API 684 half-power method).
    half_power_rpm : (float, float)
        Speeds where the amplitude is the peak's / sqrt(2), interpolated linearly.
    phase_change_deg : float
        Lag at the upper half-power speed minus lag at the lower one (degrees; about 90 for a
        single mode).
    phase_at_peak_deg : float
        Lag at the peak, 0-360.
    damping_ratio : float
        ``1 / (2 AF)``.
    shape_misfit : float
        RMS difference between the measured peak (normalised) and the single-degree-of-freedom
        curve with the same critical and damping, over the half-power band widened 1.5 x.
    separation_margin_pct : float or None
        From the operating range (see :func:`separation_margin_pct`); None without one.
    required_margin_pct : float or None
        What API 617 / 684 would ask for at this AF (see :func:`required_margin_pct`).
    absolute_phase : bool
        Whether the track's phase is measured from a once-per-rev reference.
    sweep_rpm_per_s : float or None
        How fast the run swept through the peak (rpm/s, magnitude); None when unknown.
    sweep_loss_db : float or None
        How far that sweep kept the peak below its steady-state value (dB, passage through
        resonance at the measured damping; :mod:`workbench.sampling.resonance`).  Above 1 dB
        the peak reads low, late and broad: the speed and AF are biased (a warning says so).
    """

    order: float
    rpm: float
    amplitude: float
    amplification_factor: float
    half_power_rpm: tuple[float, float]
    phase_change_deg: float
    phase_at_peak_deg: float
    damping_ratio: float
    shape_misfit: float
    separation_margin_pct: float | None = None
    required_margin_pct: float | None = None
    absolute_phase: bool = True
    sweep_rpm_per_s: float | None = None
    sweep_loss_db: float | None = None

    @property
    def margin_ok(self) -> bool | None:
        """True when the margin meets :attr:`required_margin_pct`; None without a range."""
        if self.separation_margin_pct is None:
            return None
        return self.separation_margin_pct >= self.required_margin_pct

    def to_dict(self) -> dict:
        """Plain values (the ``criticals`` entries of ``foldline criticals --json``)."""
        return {
            "order": self.order,
            "rpm": self.rpm,
            "amplitude": self.amplitude,
            "amplification_factor": self.amplification_factor,
            "half_power_rpm": list(self.half_power_rpm),
            "phase_change_deg": self.phase_change_deg,
            "phase_at_peak_deg": self.phase_at_peak_deg,
            "damping_ratio": self.damping_ratio,
            "separation_margin_pct": self.separation_margin_pct,
            "required_margin_pct": self.required_margin_pct,
            "sweep_rpm_per_s": self.sweep_rpm_per_s,
            "sweep_loss_db": self.sweep_loss_db,
        }


@dataclass(frozen=True)
class RejectedPeak:
    """A peak of an order track not taken for a critical, and why."""

    order: float
    rpm: float
    amplitude: float
    reason: str


@dataclass(frozen=True)
class CriticalSearch:
    """What :func:`find_criticals` found: criticals (by speed) and rejected peaks."""

    criticals: tuple[CriticalSpeed, ...]
    rejected: tuple[RejectedPeak, ...]


def _crossing(x: np.ndarray, y: np.ndarray, i0: int, level: float, step: int) -> float | None:
    """Speed where y first falls below `level` walking from i0 by `step`, interpolated."""
    i = i0
    while 0 <= i + step < len(y):
        j = i + step
        if y[j] < level:
            t = (y[i] - level) / (y[i] - y[j])
            return float(x[i] + t * (x[j] - x[i]))
        i = j
    return None


def find_criticals(track: OrderTrack, *, operating_rpm=None, min_phase_change_deg: float = 45.0,
                   max_phase_change_deg: float = 135.0, max_shape_misfit: float = 0.12,
                   min_points: int = 3, min_prominence: float = 0.25,
                   min_width_blocks: float = 2.0, shape_band: float = 1.5) -> CriticalSearch:
    """Critical speeds of one order track (resonance peaks that behave like a single mode).

    Parameters
    ----------
    track : OrderTrack
    operating_rpm : (float, float), optional
        Operating speed range (rpm) for the separation margin.
    min_phase_change_deg, max_phase_change_deg : float
        The lag must rise across the half-power speeds by an amount in this range (a single
        mode gives about 90 degrees; 45 and 135 leave room for a neighbouring mode and for
        the sweep).
    max_shape_misfit : float
        Largest RMS difference (fraction of the peak) between the measured peak and the
        single-degree-of-freedom curve with the same critical and damping ratio.
    min_points : int
        Track points needed between the half-power speeds.
    min_width_blocks : float
        The half-power width must be at least this many times the speed change over one
        block (a narrower peak is not resolved: noise, or use fewer revolutions per block).
    shape_band : float
        The shape is compared over ``Nc +- shape_band x (N2 - N1)``: wide enough (1.5) to
        reach the tails, where a single mode still stands at a third of its peak while a line
        passing through the order has left the window's main lobe.
    min_prominence : float
        Least prominence of a candidate peak, as a fraction of its height (0.25: the
        amplitude must fall by a quarter on both sides before rising again).

    Returns
    -------
    CriticalSearch
        ``criticals`` sorted by speed, ``rejected`` peaks with the reason.

    Notes
    -----
    For each peak of the amplitude against speed (:func:`scipy.signal.find_peaks`): the
    half-power speeds are where the amplitude first falls below peak / sqrt 2 on each side;
    ``AF = Nc / (N2 - N1)``; the unwrapped lag at N1 and N2 gives the phase change; the
    single-degree-of-freedom unbalance curve (:func:`sdof_unbalance`, scaled to the peak) with
    ``zeta = 1 / (2 AF)`` is compared with the measured points inside
    ``Nc +- shape_band x (N2 - N1)``.
    A peak is a critical when the phase rises by ``min..max_phase_change_deg`` and the shape
    fits within ``max_shape_misfit``.

    References
    ----------
    .. [1] American Petroleum Institute, API Recommended Practice 684, 2nd ed., 2005
       (half-power amplification factor; from memory).
    .. [2] S. S. Rao, "Mechanical Vibrations", 5th ed., Prentice Hall, 2011, section 3.7.
    """
    if not isinstance(track, OrderTrack):
        raise InputError(f"track = {show(track)}: must be an "
                         "OrderTrack")
    if operating_rpm is not None:
        operating_rpm = _operating(operating_rpm)
    min_points = checks.positive_int(None, "min_points", min_points, whole_float=False)
    rpm, amp, lag = track.sorted_by_rpm()
    found, rejected = [], []
    if len(rpm) < 5 or not rpm[-1] - rpm[0] > 1e-6 * abs(rpm[-1]):
        return CriticalSearch((), ())      # too short, or a constant speed: no resonance curve
    # speed change over one block, around each point (rpm): |d rpm / d rev| x revs_per_block
    order_t = np.argsort(track.revs, kind="stable")
    slope = np.abs(np.gradient(track.rpm[order_t], track.revs[order_t]))
    block_span = (slope * track.revs_per_block)[np.argsort(order_t)]
    block_span = block_span[np.argsort(track.rpm, kind="stable")]
    height = float(np.nanmax(amp))
    if not height > 0:
        return CriticalSearch((), ())
    peaks, props = find_peaks(amp, prominence=0.0)
    for i, prom in zip(peaks, props["prominences"]):
        a_p = float(amp[i])
        if a_p < 0.05 * height or prom < min_prominence * a_p:
            continue          # a ripple, or far below the track's strongest peak
        # refine the peak by a parabola through the three points (in rpm and amplitude)
        nc, ap = _parabola(rpm, amp, i)
        level = ap / math.sqrt(2.0)
        n1 = _crossing(rpm, amp, i, level, -1)
        n2 = _crossing(rpm, amp, i, level, +1)
        if n1 is None or n2 is None:
            side = "lower" if n1 is None else "upper"
            rejected.append(RejectedPeak(track.order, nc, ap,
                                         "the amplitude does not fall to the half-power level "
                                         f"on the {side} side (a step, a shoulder of another "
                                         "peak, or a peak at the edge of the run)"))
            continue
        inside = int(np.count_nonzero((rpm >= n1) & (rpm <= n2)))
        span = float(np.interp(nc, rpm, block_span))
        if inside < min_points or not n2 - n1 > 0 or n2 - n1 < min_width_blocks * span:
            rejected.append(RejectedPeak(track.order, nc, ap,
                                         f"{n2 - n1:.3g} rpm between the half-power speeds, "
                                         f"less than {min_width_blocks:g} x the {span:.3g} rpm "
                                         "one block spans: narrower than the track resolves "
                                         "(noise; or a real peak: use fewer revolutions per "
                                         "block, or sweep slower)"))
            continue
        af = nc / (n2 - n1)
        zeta = 1.0 / (2.0 * af)
        dphi = float(np.interp(n2, rpm, lag) - np.interp(n1, rpm, lag))
        phase_peak = float(np.mod(np.interp(nc, rpm, lag), 360.0))
        sel = np.abs(rpm - nc) <= shape_band * (n2 - n1)
        model, _ = sdof_unbalance(rpm[sel], nc * math.sqrt(1 - 2 * zeta * zeta)
                                  if zeta < 0.7 else nc, zeta)
        model = model / model.max() if model.size else model
        misfit = float(np.sqrt(np.mean((amp[sel] / ap - model) ** 2))) if model.size else np.inf
        if not min_phase_change_deg <= dphi <= max_phase_change_deg:
            rejected.append(RejectedPeak(
                track.order, nc, ap,
                f"the phase lag changes by {dphi:.0f} degrees across the half-power speeds "
                f"(a single mode turns it by about 90): a passing line or noise, not a "
                "resonance"))
            continue
        sweep, loss = _sweep_at(track, nc, zeta)
        swept = loss is not None and loss > PEAK_LOSS_LIMIT_DB
        if misfit > max_shape_misfit:
            hint = ""
            if loss is not None and loss > 0.3:
                # measured on the broadened peak, so the true loss is larger still
                hint = (f"; it was swept at {sweep:.3g} rpm/s, fast for its width (peak loss "
                        f"{loss:.1f} dB or more): a resonance passed this fast is low, late and "
                        "skewed, sweep slower to measure it")
            rejected.append(RejectedPeak(
                track.order, nc, ap,
                f"the peak's shape differs from a single mode's by {misfit:.2f} (RMS, fraction "
                f"of the peak){hint}"))
            continue
        sep = req = None
        if operating_rpm is not None:
            sep = separation_margin_pct(nc, operating_rpm)
            req = required_margin_pct(af, nc, operating_rpm)
        if swept:
            fastest = float(fastest_sweep_rpm_per_s(track.order * nc / 60.0, zeta, track.order))
            warnings.warn(f"order {track.order:g} critical at {nc:.0f} rpm was swept at "
                          f"{sweep:.3g} rpm/s: its peak reads about {loss:.1f} dB low and late, "
                          "so its speed and AF are biased; to measure it, sweep at most "
                          f"{fastest:.3g} rpm/s there (within the machine maker's limits)",
                          FoldlineWarning, stacklevel=2)
        found.append(CriticalSpeed(track.order, nc, ap, af, (n1, n2), dphi, phase_peak, zeta,
                                   misfit, sep, req, track.absolute_phase, sweep, loss))
    found.sort(key=lambda c: c.rpm)
    rejected = [p for p in rejected if p.amplitude >= 0.25 * height]
    return CriticalSearch(tuple(found), tuple(rejected))


def find_track_criticals(tracks, *, operating_rpm=None, leakage_db: float = 40.0,
                         **options) -> CriticalSearch:
    """Critical speeds of several order tracks of one channel (see :func:`find_criticals`).

    A peak found in one order's track at the speed of a critical of another order that is
    more than `leakage_db` stronger is that order's window leakage (the Hann window's sidelobes
    let a strong order into its neighbours' tracks, shaped like its own resonance) and is
    moved to the rejected peaks.

    Parameters
    ----------
    tracks : sequence of OrderTrack
        Tracks of the same channel.
    operating_rpm : (float, float), optional
    leakage_db : float
        Level difference beyond which a same-speed peak counts as leakage (default 40 dB).
    **options
        Passed to :func:`find_criticals`.

    Returns
    -------
    CriticalSearch
        Criticals sorted by order then speed.
    """
    found, rejected = [], []
    for tr in tracks:
        res = find_criticals(tr, operating_rpm=operating_rpm, **options)
        found.extend(res.criticals)
        rejected.extend(res.rejected)
    ratio = 10.0 ** (leakage_db / 20.0)
    kept = []
    for c in found:
        stronger = [o for o in found if o.order != c.order
                    and o.half_power_rpm[0] <= c.rpm <= o.half_power_rpm[1]
                    and o.amplitude > ratio * c.amplitude]
        if stronger:
            rejected.append(RejectedPeak(c.order, c.rpm, c.amplitude,
                                         f"at the speed of order {stronger[0].order:g}'s "
                                         f"critical, {leakage_db:g} dB weaker or more: that "
                                         "order's leakage into this track"))
        else:
            kept.append(c)
    kept.sort(key=lambda c: (c.order, c.rpm))
    return CriticalSearch(tuple(kept), tuple(rejected))


def _sweep_at(track: OrderTrack, rpm: float, zeta: float):
    """(sweep rate in rpm/s, peak loss in dB) where the track passes `rpm`; (None, None) if
    the track cannot tell (fewer than 2 points)."""
    k = np.argsort(track.revs, kind="stable")
    revs, speed = track.revs[k], track.rpm[k]
    if len(revs) < 2:
        return None, None
    i = int(np.argmin(np.abs(speed - rpm)))
    j0, j1 = max(i - 2, 0), min(i + 2, len(revs) - 1)
    if revs[j1] == revs[j0]:
        return None, None
    slope = (speed[j1] - speed[j0]) / (revs[j1] - revs[j0])      # rpm per rev
    sweep = abs(float(slope)) * rpm / 60.0                        # rpm per s
    fn = track.order * rpm / 60.0
    loss = float(passage_loss_db(fn, zeta, track.order * sweep / 60.0))
    return sweep, loss


def _parabola(x: np.ndarray, y: np.ndarray, i: int) -> tuple[float, float]:
    if i == 0 or i == len(y) - 1:
        return float(x[i]), float(y[i])
    x0, x1, x2 = x[i - 1], x[i], x[i + 1]
    y0, y1, y2 = y[i - 1], y[i], y[i + 1]
    den = (x0 - x1) * (x0 - x2) * (x1 - x2)
    if den == 0:
        return float(x1), float(y1)
    a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den
    b = (x2 * x2 * (y0 - y1) + x1 * x1 * (y2 - y0) + x0 * x0 * (y1 - y2)) / den
    c = (x1 * x2 * (x1 - x2) * y0 + x2 * x0 * (x2 - x0) * y1 + x0 * x1 * (x0 - x1) * y2) / den
    if a >= 0:
        return float(x1), float(y1)
    xv = -b / (2 * a)
    if not x0 <= xv <= x2:
        return float(x1), float(y1)
    return float(xv), float(a * xv * xv + b * xv + c)
