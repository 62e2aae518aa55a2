"""Order extraction by the second-generation Vold-Kalman filter.

What it does
------------
Each chosen order ``k`` is modelled as a slowly varying complex envelope ``c_k(t)`` carried by
the shaft's phasor ``theta_k(t) = exp(2 pi i order_k revs(t))``::

    x(t) = sum_k Re(c_k(t) theta_k(t)) + (everything else)          (data equation)
    grad^p c_k(t) = e_k(t)                                           (structural equation)

where ``grad^p`` is the backward difference of order ``p`` (1, 2 or 3).  The envelopes of all
orders are found *jointly* as the least-squares solution of both equations, the structural
residual weighted by the factor ``r`` (Vold & Leuridan 1993; Vold, Herlufsen, Mains &
Corwin-Renner 1997)::

    minimise  sum_n |x_n - sum_k a_k,n theta_k,n|^2 + sum_k r_k^2 sum_n |grad^p a_k,n|^2

with ``c_k = 2 a_k`` (``a_k`` is the analytic part; the negative-frequency half of the real
signal lies ``2 f_k`` away and is rejected like any other component).  Its normal equations are
a Hermitian positive-definite banded system: with the unknowns interleaved per sample
(``a_1,n ... a_K,n``) the half-bandwidth is ``p K``.  Because the orders are solved together,
two orders closer than the bandwidth, or crossing each other, are separated: the data equation
is shared, the smoothness is demanded of each envelope.

Weighting factor and bandwidth
------------------------------
At constant speed the filter is linear and time invariant on the demodulated signal
``x theta_k*``; its frequency response at ``f`` Hz from the order is::

    H(f) = 1 / (1 + r^2 (2 - 2 cos(2 pi f / rate))^p)

so the -3 dB (half-power) points lie at ``f = +-B/2`` when (Tuma 2005)::

    r = sqrt( (sqrt(2) - 1) / (2 - 2 cos(pi B / rate))^p )

``B`` is the full -3 dB bandwidth (Hz) around the order.  Constant bandwidth: ``B`` fixed in Hz.
Constant percentage: ``B = pct / 100 x order x f_rot(t)``, so ``r`` varies with time and each
structural row carries its own weight (Pan & Lin 2006).  :func:`vk_weighting`,
:func:`vk_bandwidth_hz` and :func:`vk_response` hold the relation; ``tests/test_angle_vold_
kalman.py`` measures the -3 dB point of the extraction on a stepped tone against it.

How it is solved (numerics)
---------------------------
At 51.2 kHz a 2 Hz bandwidth of order 2 needs ``r^2`` of about 4e13 and at order 3 about 1e20:
in the normal equations the unit data term is lost in rounding beside ``r^2 grad^T grad``
(Cholesky fails or returns noise; measured while designing this module).  The envelopes are
narrow-band, so the same least-squares problem is posed on a coarser *envelope grid*:

1. the channel is demodulated by each order's phasor (phase reduced to one turn in double
   precision, its cosine and sine taken in single precision: at most 2e-7 rad, about -134 dB,
   per sample, averaged down by the filters; in double precision when nothing is decimated)
   and low-passed by a cascade of
   linear-phase Kaiser FIR decimators (Kaiser 1974; 110 dB stopband, passband flat to 3e-6) to
   the envelope rate, chosen so that the filter's own response ``H`` has fallen below 1e-5
   (-100 dB) at the decimators' pass edge and the envelope rate is at least 20 x the widest
   bandwidth (at least 2.5 x the pass edge).  The first stage runs chunk by chunk over the
   record;
2. the coupling terms ``theta_k* theta_j`` are kept where the two orders lie closer than the
   pass edge (where the low-pass keeps them) and dropped where they lie beyond it (where the
   decimator removed that cross-talk and the filter's response is below -100 dB anyway);
3. the banded system is solved with the weighting factor of the envelope rate (the same
   bandwidth ``B``) by :func:`scipy.linalg.solveh_banded` (LAPACK Cholesky, linear cost),
   section by section: sections overlap by the length over which the inverse's influence
   decays below 1e-13 (from the roots of the filter's characteristic polynomial, doubled), so
   the seams do not show (tested against the whole record to 1e-9).

When the bandwidth is wide enough for the full rate (envelope rate = channel rate) no
decimation is done and the published equations are solved as they stand.  The envelope is
returned on the envelope grid; :meth:`OrderExtraction.waveform` rebuilds an order's time
waveform at the channel's rate (cubic-spline envelope times the phasor).

Limits: the first and last ``~ 1 / B`` seconds carry the usual end effects of a smoother; where
an order's frequency is below its bandwidth its negative-frequency image is not rejected (a
warning says below which speed); an order above the Nyquist frequency cannot be extracted (a
warning says where).

References
----------
.. [1] H. Vold and J. Leuridan, "High resolution order tracking at extreme slew rates, using
   Kalman tracking filters", SAE Technical Paper 931288, 1993.
.. [2] H. Vold, H. Herlufsen, M. Mains and D. Corwin-Renner, "Multi axle order tracking with
   the Vold-Kalman tracking filter", Sound and Vibration 31(5):30-34, 1997.
.. [3] J. Tuma, "Setting the passband width in the Vold-Kalman order tracking filter", Proc.
   12th International Congress on Sound and Vibration (ICSV12), Lisbon, 2005.
.. [4] M.-C. Pan and Y.-F. Lin, "Further exploration of Vold-Kalman-filtering order tracking
   with shaft-speed information - (I) Theoretical part, numerical implementation and parameter
   investigations", Mechanical Systems and Signal Processing 20(5):1134-1154, 2006.
.. [5] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window function",
   Proc. IEEE International Symposium on Circuits and Systems, 20-23, 1974.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterator
from dataclasses import dataclass, field
from math import comb

import numpy as np
from scipy.linalg import solveh_banded

from workbench import checks
from workbench.checks import show
from workbench.angle._common import one_d
from workbench.angle.shaft_angle import ShaftAngle
from workbench.errors import FoldlineWarning, InputError

__all__ = ["OrderExtraction", "extract_orders", "vk_weighting", "vk_bandwidth_hz", "vk_response",
           "FILTER_ORDERS", "DEFAULT_BANDWIDTH_HZ"]

#: Orders of the structural equation (backward difference of the envelope) offered.
FILTER_ORDERS = (1, 2, 3)

#: -3 dB bandwidth used when neither a bandwidth in Hz nor a percentage is given.
DEFAULT_BANDWIDTH_HZ = 2.0

_HALF_POWER = math.sqrt(2.0) - 1.0
#: Filter response at the decimators' pass edge (the coupling and the anti-alias design).
_EDGE_RESPONSE = 1e-5
#: Stopband attenuation of the decimators, dB (passband ripple 10**(-110/20) = 3e-6).
_STOP_DB = 110.0
#: Envelope rate over the widest bandwidth (a cubic spline rebuilds B/2 within ~2e-6).
_RATE_PER_BANDWIDTH = 20.0
#: Influence below which the overlap of two sections is cut off (doubled for safety).
_DECAY = 1e-13
#: Full-rate samples demodulated per chunk in the first decimation stage.
_CHUNK = 1 << 19
#: Narrowest bandwidth relative to the widest (constant percentage at low speed is raised).
_BANDWIDTH_SPAN = 100.0


# --------------------------------------------------------------------------------------------
# bandwidth <-> weighting factor


def _filter_order(p) -> int:
    if isinstance(p, bool) or not isinstance(p, (int, np.integer)) or int(p) not in FILTER_ORDERS:
        raise InputError(f"filter_order = {show(p)}: must be 1, 2 or 3 (order of the "
                         "structural equation: 2 is the usual choice)")
    return int(p)


def vk_weighting(bandwidth_hz, rate_hz, filter_order=2):
    """Weighting factor ``r`` of the structural equation for a -3 dB bandwidth.

    Parameters
    ----------
    bandwidth_hz : float or array_like
        Full -3 dB bandwidth ``B`` around the order, Hz (> 0, below the rate).
    rate_hz : float
        Rate of the samples the filter runs on, Hz.
    filter_order : {1, 2, 3}
        Order ``p`` of the structural equation.

    Returns
    -------
    float or ndarray
        ``r = sqrt((sqrt(2) - 1) / (2 - 2 cos(pi B / rate))^p)``.

    References
    ----------
    .. [1] J. Tuma, "Setting the passband width in the Vold-Kalman order tracking filter",
       ICSV12, Lisbon, 2005.

    Examples
    --------
    >>> round(float(vk_weighting(10.0, 1000.0, 1)), 3)  # sqrt(0.41421 / (2 - 2 cos(0.01 pi)))
    20.487
    """
    p = _filter_order(filter_order)
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    b = np.asarray(bandwidth_hz, dtype=np.float64)
    if not np.all(np.isfinite(b)) or np.any(b <= 0) or np.any(b >= rate):
        raise InputError(f"bandwidth_hz = {show(bandwidth_hz)}: must be 0 < B < the rate "
                         f"({rate:g} Hz)")
    return np.sqrt(_HALF_POWER / (2.0 - 2.0 * np.cos(np.pi * b / rate)) ** p)[()]


def vk_bandwidth_hz(weighting, rate_hz, filter_order=2):
    """-3 dB bandwidth (Hz) of a weighting factor ``r``: the inverse of :func:`vk_weighting`."""
    p = _filter_order(filter_order)
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    r = np.asarray(weighting, dtype=np.float64)
    if not np.all(np.isfinite(r)) or np.any(r <= 0):
        raise InputError(f"weighting = {show(weighting)}: must be a finite number > 0")
    c = 1.0 - 0.5 * (_HALF_POWER / r ** 2) ** (1.0 / p)
    return (rate / np.pi * np.arccos(np.clip(c, -1.0, 1.0)))[()]


def vk_response(offset_hz, bandwidth_hz, rate_hz, filter_order=2):
    """Amplitude response of the filter at ``offset_hz`` from the order (constant speed).

    ``H(f) = 1 / (1 + r^2 (2 - 2 cos(2 pi f / rate))^p)``; ``H(+-B/2) = 1/sqrt(2)``.
    """
    r = vk_weighting(bandwidth_hz, rate_hz, filter_order)
    f = np.asarray(offset_hz, dtype=np.float64)
    return (1.0 / (1.0 + r ** 2 * (2.0 - 2.0 * np.cos(2 * np.pi * f / float(rate_hz)))
                   ** int(filter_order)))[()]


def _edge_hz(bandwidth_hz: float, p: int) -> float:
    """Offset (Hz) where the response has fallen to _EDGE_RESPONSE (small-angle form)."""
    return 0.5 * bandwidth_hz * ((1.0 / _EDGE_RESPONSE - 1.0) / _HALF_POWER) ** (1.0 / (2 * p))


def _decay_samples(r2: float, p: int) -> int:
    """Samples over which the inverse's influence falls below _DECAY, doubled."""
    # Characteristic polynomial z^p + r^2 (-1)^p (z - 1)^(2p): reciprocal root pairs.
    poly = np.array([r2 * (-1) ** p * comb(2 * p, j) * (-1) ** j for j in range(2 * p + 1)],
                    dtype=np.float64)
    poly[p] += 1.0
    moduli = np.abs(np.roots(poly))
    rho = float(np.max(moduli[moduli < 1.0]))
    return int(math.ceil(2.0 * math.log(_DECAY) / math.log(rho))) + 2 * p


# --------------------------------------------------------------------------------------------
# the result


@dataclass(frozen=True, eq=False)
class OrderExtraction:
    """Envelopes of orders extracted together by the Vold-Kalman filter.

    Attributes
    ----------
    orders : tuple of float
        The orders extracted, in the order asked.
    rate_hz : float
        Rate of the channel (Hz).
    envelope_rate_hz : float
        Rate of the envelope grid (Hz): the channel's rate divided by an integer.
    time_s : ndarray, shape (m,)
        Times of the envelope grid (s), inside the shaft angle's span.
    rpm : ndarray, shape (m,)
        Reference shaft speed at those times (rpm).
    envelope : ndarray of complex, shape (n_orders, m)
        Complex amplitude of each order (peak, channel units): the order's waveform is
        ``Re(envelope x exp(2 pi i order revs(t)))``, so the phase is that of a cosine whose
        zero is the shaft angle's zero.
    bandwidth_hz : ndarray, shape (n_orders, m)
        -3 dB bandwidth in force at each time (constant, or a percentage of the order's Hz).
    filter_order : int
        Order of the structural equation.
    n_samples : int
        Length of the channel (samples); :meth:`waveform` returns this many.
    start_s : float
        Time of the channel's first sample (s).
    angle : ShaftAngle
        The speed the phasors came from.
    log : tuple of str
        What was done (envelope rate, decimation, sections, adjustments).
    """

    orders: tuple
    rate_hz: float
    envelope_rate_hz: float
    time_s: np.ndarray
    rpm: np.ndarray
    envelope: np.ndarray
    bandwidth_hz: np.ndarray
    filter_order: int
    n_samples: int
    start_s: float
    angle: ShaftAngle = field(repr=False)
    log: tuple = ()

    @property
    def amplitude(self) -> np.ndarray:
        """Peak amplitude of each order (channel units), shape (n_orders, m)."""
        return np.abs(self.envelope)

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of each order (degrees, -180 to 180), shape (n_orders, m)."""
        return np.degrees(np.angle(self.envelope))

    def index(self, order) -> int:
        """Row of ``order`` in the arrays (nearest extracted order within 1e-9)."""
        o = checks.real(None, "order", order)
        d = np.abs(np.asarray(self.orders) - o)
        i = int(np.argmin(d))
        if d[i] > 1e-9 * max(1.0, abs(o)):
            raise InputError(f"order {order!r} was not extracted; extracted: "
                             + ", ".join(f"{v:g}" for v in self.orders))
        return i

    def iter_waveform(self, order, *, chunk: int = _CHUNK) -> Iterator[np.ndarray]:
        """The order's time waveform at the channel's rate, chunk by chunk (float64).

        Zero outside the span where the shaft angle (and so the envelope) is known.
        """
        from scipy.interpolate import CubicSpline

        k = self.index(order)
        spline = CubicSpline(self.time_s, self.envelope[k]) if len(self.time_s) > 1 else None
        o = float(self.orders[k])
        t_lo, t_hi = self.angle.t_start_s, self.angle.t_end_s
        for a in range(0, self.n_samples, chunk):
            b = min(a + chunk, self.n_samples)
            t = self.start_s + np.arange(a, b, dtype=np.float64) / self.rate_hz
            out = np.zeros(b - a)
            inside = (t >= t_lo) & (t <= t_hi)
            if inside.any():
                ti = t[inside]
                env = spline(ti) if spline is not None else np.full(ti.shape, self.envelope[k, 0])
                ph = o * self.angle.revs_at(ti)
                ph -= np.floor(ph)
                out[inside] = (env * np.exp(2j * np.pi * ph)).real
            yield out

    def waveform(self, order) -> np.ndarray:
        """The order's time waveform at the channel's rate, shape (n_samples,), float64."""
        return np.concatenate(list(self.iter_waveform(order)))


# --------------------------------------------------------------------------------------------
# decimation


@dataclass(frozen=True)
class _Stage:
    q: int
    h: np.ndarray         # symmetric, length 2M + 1, M a multiple of q
    csum: np.ndarray      # cumulative sums of h (edge normalisation)

    @property
    def half(self) -> int:
        return (len(self.h) - 1) // 2


def _design_stages(rate_hz: float, factors: list, pass_hz: float) -> list:
    from scipy.signal import firwin, kaiserord

    stages, fs = [], rate_hz
    for q in factors:
        out = fs / q
        stop = out - pass_hz
        numtaps, beta = kaiserord(_STOP_DB, (stop - pass_hz) / (0.5 * fs))
        m = -(-((numtaps - 1) // 2 + 1) // q) * q
        h = firwin(2 * m + 1, 0.5 * (pass_hz + stop), window=("kaiser", beta), fs=fs)
        stages.append(_Stage(q, h, np.concatenate(([0.0], np.cumsum(h)))))
        fs = out
    return stages


def _decimate(stage: _Stage, get, n: int, m0: int, m1: int) -> np.ndarray:
    """Outputs m0..m1-1 of one decimating stage; output m is centred on input m q.

    ``get(a, b)`` returns inputs a..b-1 (shape (..., b - a)); the record is zero outside
    [0, n) and each output is divided by the sum of the taps that met the record.
    """
    from scipy.signal import upfirdn

    q, half = stage.q, stage.half
    s0, s1 = m0 * q - half, (m1 - 1) * q + half + 1
    a, b = max(s0, 0), min(s1, n)
    block = get(a, b)
    seg = np.zeros(block.shape[:-1] + (s1 - s0,), dtype=block.dtype)
    seg[..., a - s0:b - s0] = block
    full = upfirdn(stage.h, seg, down=q, axis=-1)
    skip = 2 * half // q
    out = full[..., skip:skip + (m1 - m0)]
    centre = np.arange(m0, m1) * q + half           # tap index meeting input 0 is centre
    lo = np.clip(centre - (n - 1), 0, 2 * half + 1)
    hi = np.clip(centre + 1, 0, 2 * half + 1)
    norm = stage.csum[hi] - stage.csum[lo]
    return out / norm


# --------------------------------------------------------------------------------------------
# the banded solve


def _diff_coefficients(p: int) -> np.ndarray:
    return np.array([(-1) ** (p - j) * comb(p, j) for j in range(p + 1)], dtype=np.float64)


def _solve_span(y: np.ndarray, coupling: dict, w: np.ndarray, p: int) -> np.ndarray:
    """Solve the joint normal equations on one span: y (K, L), w (K, L) = r^2 per sample."""
    n_orders, length = y.shape
    kd = p * n_orders
    size = n_orders * length
    ab = np.zeros((kd + 1, size), dtype=np.complex128)
    ab[kd] = 1.0
    c = _diff_coefficients(p)
    rows = length - p
    if rows > 0:
        for k in range(n_orders):
            wr = w[k, p // 2:p // 2 + rows]
            for d in range(p + 1):
                for j in range(p + 1 - d):
                    start = (j + d) * n_orders + k
                    ab[kd - d * n_orders, start:start + rows * n_orders:n_orders] += \
                        wr * (c[j] * c[j + d])
    for (k, j), cj in coupling.items():
        ab[kd - (j - k), j::n_orders] = cj
    rhs = np.ascontiguousarray(y.T).reshape(size)
    sol = solveh_banded(ab, rhs, lower=False, overwrite_ab=True, overwrite_b=True,
                        check_finite=False)
    return sol.reshape(length, n_orders).T


def _solve_sections(y, coupling, w, p, section: int, overlap: int) -> np.ndarray:
    n_orders, n = y.shape
    out = np.empty((n_orders, n), dtype=np.complex128)
    s = 0
    while s < n:
        e = min(n, s + section)
        a, b = max(0, s - overlap), min(n, e + overlap)
        part = _solve_span(y[:, a:b], {kj: v[a:b] for kj, v in coupling.items()}, w[:, a:b], p)
        out[:, s:e] = part[:, s - a:e - a]
        s = e
    return out


# --------------------------------------------------------------------------------------------
# the extraction


def _orders_tuple(orders) -> tuple:
    vals = np.atleast_1d(np.asarray(orders, dtype=np.float64)) if not isinstance(orders, str) \
        else np.array([np.nan])
    if vals.ndim != 1 or len(vals) == 0 or not np.all(np.isfinite(vals)) or np.any(vals <= 0):
        raise InputError(f"orders = {show(orders)}: must be one or more positive orders, "
                         "e.g. (4, 4.1)")
    if len(set(vals.tolist())) != len(vals):
        raise InputError(f"orders {orders!r}: an order is given twice; give each order once")
    return tuple(float(v) for v in vals)


def _stage_factors(ratio: int) -> list:
    """Split a decimation ratio 8^a x q into stages of 8 and a last stage q."""
    factors = []
    while ratio % 8 == 0 and ratio // 8 >= 2:
        factors.append(8)
        ratio //= 8
    if ratio > 1:
        factors.append(ratio)
    return factors


def _choose_ratio(rate_hz: float, min_rate_hz: float) -> int:
    """Largest 8^a x q (2 <= q <= 15, stages of 8 first) with rate / ratio >= min_rate."""
    most = int(math.floor(rate_hz / min_rate_hz))
    if most < 2:
        return 1
    a = 0
    while most // 8 ** (a + 1) >= 2:
        a += 1
    return 8 ** a * min(15, most // 8 ** a)


def extract_orders(x, rate_hz, angle: ShaftAngle, orders, *, bandwidth_hz=None,
                   bandwidth_pct=None, filter_order: int = 2, envelope_rate_hz=None,
                   section_s=None, start_s: float = 0.0) -> OrderExtraction:
    """Extract one or several orders of a channel together with the Vold-Kalman filter.

    Parameters
    ----------
    x : array_like, shape (n,)
        The channel (physical units); a memory map is read chunk by chunk.
    rate_hz : float
        Its sample rate, Hz.
    angle : ShaftAngle
        Reference shaft angle against time (from a tacho or a known speed).
    orders : float or sequence of float
        Orders to extract together (positive, distinct), e.g. ``(4, 4.1)``.
    bandwidth_hz : float, optional
        Constant -3 dB bandwidth around every order, Hz.  Default 2 Hz when no percentage.
    bandwidth_pct : float, optional
        Constant-percentage bandwidth: ``pct / 100 x order x shaft speed (Hz)``; at low speed
        it is raised to 1/100 of the widest bandwidth of the run (a warning says so).
    filter_order : {1, 2, 3}
        Order of the structural equation (2: the usual choice; 3 has a steeper skirt).
    envelope_rate_hz : float, optional
        Rate of the envelope grid (rounded to the channel's rate over an integer); default
        chosen from the bandwidth (see the module notes).
    section_s : float, optional
        Length of the sections solved one at a time (s), default the longer of 4 overlaps
        and 65,536 envelope samples.  The result does not depend on it (to 1e-9).
    start_s : float
        Time of the channel's first sample (s).

    Returns
    -------
    OrderExtraction
        Envelopes on the envelope grid over the span of the shaft angle (the channel's samples
        outside that span are not used; the rebuilt waveform is zero there).

    Raises
    ------
    InputError
        Bad orders, bandwidths or filter order; no sample of the channel inside the angle's
        span; an envelope grid too short for the filter order.

    Warns
    -----
    FoldlineWarning
        An order above the Nyquist frequency somewhere; an order below its own bandwidth
        (image not rejected); a percentage bandwidth raised at low speed; a bandwidth range
        so wide that the solution loses digits.

    References
    ----------
    .. [1] H. Vold and J. Leuridan, "High resolution order tracking at extreme slew rates,
       using Kalman tracking filters", SAE Technical Paper 931288, 1993.
    .. [2] H. Vold, H. Herlufsen, M. Mains and D. Corwin-Renner, "Multi axle order tracking
       with the Vold-Kalman tracking filter", Sound and Vibration 31(5):30-34, 1997.
    .. [3] J. Tuma, "Setting the passband width in the Vold-Kalman order tracking filter",
       ICSV12, Lisbon, 2005.
    .. [4] M.-C. Pan and Y.-F. Lin, "Further exploration of Vold-Kalman-filtering order
       tracking with shaft-speed information - (I) Theoretical part, numerical implementation
       and parameter investigations", Mechanical Systems and Signal Processing
       20(5):1134-1154, 2006.

    Examples
    --------
    >>> rate = 2048.0
    >>> angle = ShaftAngle.from_rpm(1200.0, 8.0)
    >>> t = np.arange(int(8 * rate)) / rate
    >>> x = 0.5 * np.cos(2 * np.pi * 4 * angle.revs_at(t) + 0.3)
    >>> ex = extract_orders(x, rate, angle, 4, bandwidth_hz=2.0)
    >>> mid = len(ex.time_s) // 2
    >>> round(float(ex.amplitude[0, mid]), 6), round(float(np.radians(ex.phase_deg[0, mid])), 6)
    (0.5, 0.3)
    """
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    p = _filter_order(filter_order)
    if not isinstance(angle, ShaftAngle):
        raise InputError("angle must be a ShaftAngle (from tacho_angle, ShaftAngle.from_rpm or "
                         "ShaftAngle.from_speed_table)")
    ords = _orders_tuple(orders)
    if bandwidth_hz is not None and bandwidth_pct is not None:
        raise InputError("give either bandwidth_hz (constant, Hz) or bandwidth_pct (percentage "
                         "of each order's frequency), not both")
    if bandwidth_pct is not None:
        pct = checks.real(None, "bandwidth_pct", bandwidth_pct)
        if not 0 < pct < 100:
            raise InputError(f"bandwidth_pct = {show(bandwidth_pct)}: must be 0 < pct "
                             "< 100 (percent of the order's frequency)")
    else:
        bw = DEFAULT_BANDWIDTH_HZ if bandwidth_hz is None else checks.real(
            None, "bandwidth_hz", bandwidth_hz)
        if not 0 < bw < rate / 4:
            raise InputError(f"bandwidth_hz = {show(bandwidth_hz)}: must be 0 < B < "
                             f"{rate / 4:g} Hz (a quarter of the rate)")
    x = one_d(x, "x")
    n = len(x)
    start = checks.real(None, "start_s", start_s)
    i0 = max(0, int(math.ceil((angle.t_start_s - start) * rate - 1e-9)))
    i1 = min(n, int(math.floor((angle.t_end_s - start) * rate + 1e-9)) + 1)
    if i1 - i0 < 2:
        raise InputError(f"the channel ({n} samples from {start:g} s at {rate:g} Hz) has no "
                         f"samples inside the shaft angle's span {angle.t_start_s:g} to "
                         f"{angle.t_end_s:g} s; give the speed of the recorded span")
    n_span = i1 - i0
    t_first = start + i0 / rate
    t_last = start + (i1 - 1) / rate
    f_lo, f_hi = angle._speed_range_hz(t_first, t_last)
    f_lo = max(f_lo, 0.0)
    log = []
    # widest and narrowest bandwidth over the run
    if bandwidth_pct is not None:
        b_max = pct / 100.0 * max(ords) * f_hi
        b_floor = b_max / _BANDWIDTH_SPAN
        if not b_max > 0:
            raise InputError("bandwidth_pct: the shaft does not turn over the span; give "
                             "bandwidth_hz instead")
        b_min = max(b_floor, pct / 100.0 * min(ords) * f_lo)
    else:
        b_max = b_min = bw
    if envelope_rate_hz is not None:
        want = checks.real(None, "envelope_rate_hz", envelope_rate_hz)
        if not 0 < want <= rate:
            raise InputError(f"envelope_rate_hz = {show(envelope_rate_hz)}: must be 0 < "
                             f"rate <= the channel's rate {rate:g} Hz")
        ratio = max(1, int(round(rate / want)))
    else:
        need = max(_RATE_PER_BANDWIDTH * b_max, 2.5 * _edge_hz(b_max, p))
        ratio = _choose_ratio(rate, need)
    env_rate = rate / ratio
    pass_hz = _edge_hz(b_max, p)
    factors = _stage_factors(ratio)
    if ratio > 1 and not env_rate > 2.0 * pass_hz:
        raise InputError(f"envelope_rate_hz {env_rate:g}: too low for a {b_max:g} Hz bandwidth; "
                         f"allowed: above {2 * pass_hz:g} Hz, or leave it to the default")
    if not b_max < env_rate / 2:
        raise InputError(f"bandwidth {b_max:g} Hz is too wide for the envelope rate "
                         f"{env_rate:g} Hz; narrow it")
    n_env = -(-n_span // ratio)
    if n_env < p + 2:
        raise InputError(f"the span holds {n_env} envelope samples; the filter of order {p} "
                         f"needs at least {p + 2}: give a longer record or a wider bandwidth")
    log.append(f"envelope grid: {env_rate:g} Hz (channel rate / {ratio}, stages "
               f"{' x '.join(str(q) for q in factors) or 'none'}); filter order {p}")
    nyq_order = [o for o in ords if o * f_hi > rate / 2]
    if nyq_order:
        warnings.warn(f"order {nyq_order[0]:g} reaches {nyq_order[0] * f_hi:g} Hz, above the "
                      f"Nyquist frequency {rate / 2:g} Hz, at the top speed "
                      f"{60 * f_hi:.0f} rpm: its extraction there is meaningless",
                      FoldlineWarning, stacklevel=2)

    # 1. demodulate and decimate (first stage chunk by chunk).  Rows 0..K-1 hold x cos(phi_k),
    # rows K..2K-1 hold -x sin(phi_k) (real filtering of the two halves is three times faster
    # than complex filtering in scipy.signal.upfirdn).
    stages = _design_stages(rate, factors, pass_hz) if factors else []
    n_ord = len(ords)
    ord_col = np.asarray(ords)[:, None]
    trig_dtype = np.float32 if stages else np.float64   # no decimation: exact equations

    def demodulated(a: int, b: int) -> np.ndarray:
        t = t_first + np.arange(a, b, dtype=np.float64) / rate
        ph = ord_col * angle.revs_at(t)[None, :]
        ph -= np.floor(ph)                       # one turn, in double precision
        ph32 = ph.astype(trig_dtype)
        ph32 *= trig_dtype(2 * np.pi)
        xs = np.asarray(x[i0 + a:i0 + b], dtype=np.float64)
        out = np.empty((2 * n_ord, b - a))
        np.multiply(np.cos(ph32), xs, out=out[:n_ord])
        np.multiply(np.sin(ph32), -xs, out=out[n_ord:])
        return out

    if not stages:
        parts = demodulated(0, n_span)
    else:
        first = stages[0]
        n1 = -(-n_span // first.q)
        per = max(1, _CHUNK // first.q)
        parts = np.empty((2 * n_ord, n1))
        for m0 in range(0, n1, per):
            m1 = min(n1, m0 + per)
            parts[:, m0:m1] = _decimate(first, demodulated, n_span, m0, m1)
        for st in stages[1:]:
            prev = parts
            n_prev = prev.shape[1]
            parts = _decimate(st, lambda a, b, arr=prev: arr[:, a:b], n_prev, 0,
                              -(-n_prev // st.q))
            del prev
    y = parts[:n_ord] + 1j * parts[n_ord:]
    del parts
    # 2. the envelope grid: speed, bandwidth, weights, coupling
    t_env = t_first + np.arange(n_env, dtype=np.float64) * ratio / rate
    rpm_env = np.asarray(angle.rpm_at(t_env), dtype=np.float64)
    f_env = rpm_env / 60.0
    if bandwidth_pct is not None:
        bws = pct / 100.0 * np.asarray(ords)[:, None] * f_env[None, :]
        low = bws < b_floor
        if low.any():
            warnings.warn(f"bandwidth_pct {pct:g}: below {60 * b_floor / (pct / 100 * min(ords)):.0f} "
                          f"rpm the bandwidth is raised to {b_floor:.3g} Hz (1/{_BANDWIDTH_SPAN:g} "
                          "of the widest) to keep the solution precise", FoldlineWarning,
                          stacklevel=2)
            bws = np.maximum(bws, b_floor)
    else:
        bws = np.full((len(ords), n_env), bw)
    w = vk_weighting(bws, env_rate, p) ** 2
    cond = float(w.max()) * 4.0 ** p              # condition number of the normal equations
    if cond > 1e12:
        warnings.warn(f"the bandwidth ({b_min:.3g} to {b_max:.3g} Hz) spans a wide range for one "
                      f"envelope rate ({env_rate:g} Hz): rounding limits the envelopes' relative "
                      f"precision to about {cond * 2.2e-16:.0e}; a constant bandwidth or filter "
                      "order 2 avoids it", FoldlineWarning, stacklevel=2)
    for i, o in enumerate(ords):
        below = 2 * o * f_env < bws[i]
        if below.any():
            warnings.warn(f"order {o:g}: below {float(np.max(rpm_env[below])):.0f} rpm its "
                          "frequency is within its bandwidth, so the mirror image of the real "
                          "signal is not rejected there", FoldlineWarning, stacklevel=2)
            break
    coupling = {}
    revs_env = angle.revs_at(t_env)
    for k in range(len(ords)):
        for j in range(k + 1, len(ords)):
            d = ords[j] - ords[k]
            ph = d * revs_env
            ph -= np.floor(ph)
            c = np.exp(2j * np.pi * ph)
            if ratio > 1:
                c[np.abs(d) * f_env >= pass_hz] = 0.0
            coupling[(k, j)] = c
    # 3. the banded solve, in overlapping sections
    overlap = _decay_samples(float(w.max()), p)
    if section_s is None:
        section = max(4 * overlap, 1 << 16)
    else:
        section = max(1, int(round(checks.real(None, "section_s", section_s) * env_rate)))
    a = _solve_sections(y, coupling, w, p, section, overlap)
    n_sections = -(-n_env // section)
    log.append(f"{n_env} envelope samples solved in {n_sections} section(s), overlap "
               f"{overlap} samples ({overlap / env_rate:.3g} s)")
    env = 2.0 * a
    return OrderExtraction(
        orders=ords, rate_hz=rate, envelope_rate_hz=env_rate, time_s=t_env, rpm=rpm_env,
        envelope=env, bandwidth_hz=bws, filter_order=p, n_samples=n, start_s=start,
        angle=angle, log=tuple(log))
