"""Pulse timing: the jitter of the pulse times, their smoothing, and the speed tolerance.

The pulse timing jitter is estimated from divided differences of the pulse times; where it
would leave the interpolated speed uncertain by more than the speed tolerance allows, the pulse
times are smoothed (:class:`PulseTiming` reports the figures).  :func:`speed_tolerance_for` and
:data:`DEFAULT_SPEED_TOLERANCE` give that tolerance from the error budget of order analysis.

Conventions: times in seconds, speed uncertainties as RMS relative figures (fractions).
"""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from scipy.linalg import solveh_banded

from workbench import checks
from workbench.errors import FoldlineWarning, InputError

__all__ = [
    "PulseTiming",
    "speed_tolerance_for",
    "DEFAULT_SPEED_TOLERANCE",
]

# --------------------------------------------------------------------------------------------
# Pulse timing jitter: estimate, and smoothing when it would reach the speed
# --------------------------------------------------------------------------------------------

# Orders of the divided differences whose robust scale estimates the jitter; the smallest of
# the three is kept, so a genuine speed variation (which shrinks with the order, while white
# jitter does not) is not taken for jitter.
_JITTER_ORDERS = (4, 6, 8)
# Pulses per block of the local jitter estimate (and of the residual check).
_JITTER_BLOCK = 256
# Order of the differences the smoothing penalises: cubics in angle are left untouched.
_SMOOTH_ORDER = 4
# The speed tolerance: an RMS relative speed uncertainty (a fraction).  Where the jitter would
# leave the interpolated speed uncertain by more than half of it, the pulse times are smoothed,
# aiming at a third of it; beyond the tolerance a warning names the figure and the seconds.
_SMOOTH_ABOVE_FRACTION = 0.5
_SMOOTH_TARGET_FRACTION = 1.0 / 3.0
# Coverage factor of the expanded uncertainty quoted beside the RMS figures (JCGM 100:2008).
_COVERAGE = 3.0
# Penalty weights stay inside [_LAMBDA_MIN, _LAMBDA_MAX] (pitch units); the smallest keeps
# the system definite at pitch positions without a pulse, the largest (a span of about 200
# pulses) keeps it well conditioned.
_LAMBDA_MIN = 1e-6
_LAMBDA_MAX = 1e12
# Noise replicates propagated through the smoothing (fixed seed: the result is repeatable).
_MC_REPLICATES = 16
_MC_SEED = 1729
# Smoothing removes part of the speed itself where the residuals, averaged over a few pulses,
# stand out from what the same smoothing leaves on pure jitter: the smoothing is reduced there
# (by _LAMBDA_STEP per pass, at most _SMOOTH_PASSES passes).
_STRUCTURE_RATIO_MAX = 2.0
_LAMBDA_STEP = 30.0
_SMOOTH_PASSES = 4
# A running mean of the residuals this many times what jitter alone gives marks a kink.
_KINK_SIGMAS = 8.0
# Edges timed only to the sample: a smoothed pulse time may be at most this times half a
# sample from its pulse.  Each time is within half a sample of its edge, but where the pitch is
# close to a whole number of samples the errors form a slow sawtooth whose jumps of one sample
# the smoothing splits in the middle (and rings a little).
_QUANTISED_SLACK = 2.0
# The edge detector's linear interpolation is taken to be no better than this fraction of a
# sample on a real edge (band-limited or ramped), whatever the difference estimate says.
_DETECTOR_FLOOR = 0.01
# A pulse whose time is this many times the jitter off the smoothed curve is given no weight.
_OUTLIER_SIGMAS = 8.0
# A block's jitter estimate is not taken below this fraction of the record's median: where the
# pitch is close to a whole number of samples the timing errors of neighbouring pulses are
# alike and the differences see almost none of them.
_JITTER_FLOOR_FRACTION = 0.5
# MAD to standard deviation for Gaussian data (Hampel 1974).
_MAD_TO_SIGMA = 1.482602218505602


@dataclass(frozen=True)
class PulseTiming:
    """How precisely the tacho pulse times fix the speed, as :func:`tacho_angle` found it.

    Attributes
    ----------
    jitter_s : float
        Estimated RMS timing jitter of the pulse edges (s), the median over the record; NaN
        when there were too few pulses (fewer than 12) to estimate it.
    speed_uncertainty : float
        Estimated RMS relative error the jitter leaves in the fitted speed (a fraction:
        ``1e-4`` is 0.01 %), over the record.
    speed_uncertainty_max : float
        Largest local value of that RMS error (a fraction), averaged over about 3 pulses
        (largest at the ends of the record, where a smoothing sees one side only).
    smoothing_s : float
        0 when the fit interpolates the pulse times; when they were smoothed, the median
        period (s) of the speed variation the smoothing halves: faster speed changes are
        rounded off.
    raw_speed_uncertainty : float
        The RMS relative speed error interpolating the pulse times would have left (a
        fraction); equals ``speed_uncertainty`` when they were not smoothed.
    angle_uncertainty_rev : float
        Estimated RMS error of the fitted shaft angle (revolutions) over the record: at order
        ``k`` it is a phase error of ``360 k angle_uncertainty_rev`` degrees RMS.
    tolerance : float
        The speed tolerance the smoothing aimed at and the warnings refer to (RMS, a fraction);
        NaN when none was set.
    sample_step_s : float
        The tacho's sample interval (s) when its edges are timed only to the sample (the pulse
        times fall on that grid: an ideal step has no sample on the edge itself, and the
        timing error is uniform within +-half a sample); NaN otherwise.
    beyond_tolerance_s : tuple of (float, float)
        Spans (s) where the local speed uncertainty exceeds the tolerance.

    Notes
    -----
    The uncertainties cover the timing jitter only; the rounding-off of speed changes faster
    than ``smoothing_s`` comes on top where the speed changes that fast.  How they are found
    (and the references) is in :func:`tacho_angle`.

    Examples
    --------
    >>> timing = PulseTiming(jitter_s=2e-6, speed_uncertainty=1e-5, speed_uncertainty_max=3e-5)
    >>> timing.smoothed, timing.describe().split(";")[0]
    (False, 'pulse timing jitter 2 us RMS')
    """

    jitter_s: float
    speed_uncertainty: float
    speed_uncertainty_max: float
    smoothing_s: float = 0.0
    raw_speed_uncertainty: float = math.nan
    angle_uncertainty_rev: float = math.nan
    tolerance: float = math.nan
    sample_step_s: float = math.nan
    beyond_tolerance_s: tuple = ()

    @property
    def smoothed(self) -> bool:
        """True when the pulse times were smoothed before the fit."""
        return self.smoothing_s > 0

    @property
    def within_tolerance(self) -> bool:
        """True unless the local speed uncertainty exceeds the tolerance somewhere."""
        return not self.beyond_tolerance_s

    def describe(self) -> str:
        """One line for a log: the jitter, whether the times were smoothed, the uncertainty."""
        if not math.isfinite(self.jitter_s):
            return "pulse timing jitter not estimated (too few pulses)"
        text = (f"pulse timing jitter {_duration(self.jitter_s)} RMS")
        if math.isfinite(self.sample_step_s):
            text += (f" (edges timed only to the sample, {_duration(self.sample_step_s)}: "
                     "uniform within +-half a sample)")
        text += (f"; speed uncertainty {_pct(self.speed_uncertainty)} % RMS, at most "
                 f"{_pct(self.speed_uncertainty_max)} % locally "
                 f"({_pct(_COVERAGE * self.speed_uncertainty_max)} % with coverage factor "
                 f"{_COVERAGE:g})")
        if math.isfinite(self.angle_uncertainty_rev):
            text += f"; angle uncertainty {360 * self.angle_uncertainty_rev:.2g} deg RMS"
        if self.smoothed:
            text += (f"; pulse times smoothed (interpolated: "
                     f"{_pct(self.raw_speed_uncertainty)} % RMS), speed changes faster "
                     f"than about {_duration(self.smoothing_s)} rounded off")
        if math.isfinite(self.tolerance):
            text += (f"; speed tolerance {_pct(self.tolerance)} % RMS" +
                     ("" if self.within_tolerance else
                      f", exceeded in {_span_list(self.beyond_tolerance_s)}"))
        return text


def _pct(fraction: float) -> str:
    """A fraction as a percentage with two significant figures ('0.016', '2.1')."""
    return f"{100 * fraction:.2g}"


def _span_list(spans) -> str:
    """'1.000-2.000 s, 3.100-3.200 s and 4 more'."""
    text = ", ".join(f"{round(a, 3) + 0.0:.3f}-{round(b, 3) + 0.0:.3f} s" for a, b in spans[:5])
    return text + (f" and {len(spans) - 5} more" if len(spans) > 5 else "")


def _duration(seconds: float) -> str:
    """A short duration for a message: '3.8 us', '1.93 ms', '0.2 s'."""
    for unit, scale in (("s", 1.0), ("ms", 1e-3), ("us", 1e-6)):
        if seconds >= scale:
            return f"{seconds / scale:.3g} {unit}"
    return f"{seconds * 1e9:.3g} ns"


def _divided_difference_scores(counts: np.ndarray, t: np.ndarray, order: int
                               ) -> tuple[np.ndarray, np.ndarray]:
    """Divided differences of ``t`` over ``order + 1`` consecutive pulses, scaled to unit noise.

    Each score is the ``order``-th divided difference of the pulse times against their pitch
    counts divided by the root sum of squares of its weights, so independent timing errors
    of standard deviation sigma give scores of standard deviation sigma, whatever the spacing
    (lost pulses, a missing-tooth gap); a polynomial of degree below ``order`` gives 0.  On
    evenly spaced pulses this is the plain ``order``-th difference over sqrt(C(2 order, order)).

    Returns the scores and the index of each one's first pulse.  Windows that span an uneven
    step (a gap, a lost pulse) are left out when most windows are even (cheaper, and enough).
    """
    y = t - t[0]
    scores = np.diff(y, n=order) / math.sqrt(math.comb(2 * order, order))
    step = np.diff(counts)
    odd = np.concatenate(([0], np.cumsum(step != step[0])))
    mixed = odd[order:] - odd[:-order]                    # odd steps in each window
    uneven = np.flatnonzero((mixed != 0) & (mixed != order))
    index = np.arange(len(scores))
    if 2 * len(uneven) <= len(scores):
        keep = np.ones(len(scores), dtype=bool)
        keep[uneven] = False
        return scores[keep], index[keep]
    if len(uneven):
        m = order + 1
        x = sliding_window_view(counts.astype(np.float64), m)[uneven]
        yy = sliding_window_view(y, m)[uneven]
        w = np.ones(x.shape)
        for j in range(m):
            for i in range(m):
                if i != j:
                    w[:, j] *= x[:, j] - x[:, i]
        w = 1.0 / w
        scores[uneven] = (w * yy).sum(axis=1) / np.sqrt((w * w).sum(axis=1))
    return scores, index


def _block_edges(n: int) -> np.ndarray:
    """Edges (pulse indices) of the blocks of about _JITTER_BLOCK pulses."""
    nb = max(1, int(round(n / _JITTER_BLOCK)))
    return np.linspace(0, n, nb + 1).astype(np.int64)


def _robust_scale(x: np.ndarray, axis=None):
    """MAD about the median, scaled to the standard deviation of Gaussian data."""
    med = np.median(x, axis=axis, keepdims=axis is not None)
    return _MAD_TO_SIGMA * np.median(np.abs(x - med), axis=axis)


def _jitter_scale(scores: np.ndarray) -> np.ndarray:
    """Scale of each row of difference scores: the larger of a robust and a trimmed RMS one.

    The robust scale (1.4826 x MAD) ignores the odd outlier; but an edge detector's error can
    be zero at most pulses and large at a few (a ramp whose ends fall between samples), which
    the MAD does not see.  The RMS of the scores without their largest 0.5 % sees it and still
    ignores an odd outlier.
    """
    robust = _robust_scale(scores, 1)
    sq = np.sort(scores * scores, axis=1)
    keep = max(1, int(math.floor(0.995 * sq.shape[1])))
    trimmed = np.sqrt(sq[:, :keep].mean(axis=1))
    return np.maximum(robust, trimmed)


def _jitter_by_block(counts: np.ndarray, t: np.ndarray, n_blocks: int
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Robust jitter estimate (s) per block of pulses, the smallest over the orders.

    Returns the block centres (pulse index) and the estimates.  White jitter gives the same
    scale at every order; a genuine speed variation between pulses shrinks with the order (on
    a smooth speed curve), so the smallest of the orders is the one least inflated by it.
    """
    sig = np.full(n_blocks, np.inf)
    centres = np.zeros(n_blocks)
    for order in _JITTER_ORDERS:
        if len(t) < order + 4:
            continue
        s, first = _divided_difference_scores(counts, t, order)
        size = len(s) // n_blocks
        if size < 5:
            continue
        est = np.empty(n_blocks)
        if n_blocks > 1:
            est[:-1] = _jitter_scale(s[:(n_blocks - 1) * size].reshape(n_blocks - 1, size))
        est[-1] = _jitter_scale(s[(n_blocks - 1) * size:][None, :])[0]
        better = est < sig
        sig = np.where(better, est, sig)
        c = np.empty(n_blocks)
        c[:-1] = first[(np.arange(n_blocks - 1) + 0.5).astype(np.int64) * size + size // 2]
        c[-1] = first[((n_blocks - 1) * size + len(s)) // 2]
        centres = np.where(better, c + 0.5 * order, centres)
    if not np.isfinite(sig).all():
        return centres, np.full(n_blocks, np.nan)
    return centres, sig


@functools.lru_cache(maxsize=1)
def _interpolant_speed_gain() -> float:
    """RMS slope of the not-a-knot cubic spline through unit white noise on a unit grid.

    Exact (the spline is linear in the data): the slope at a point is a weighted sum of the
    data, its variance the sum of the squared weights; averaged over an interior interval.
    """
    from scipy.interpolate import CubicSpline

    n = 41
    x = np.arange(n, dtype=np.float64)
    spline = CubicSpline(x, np.eye(n), bc_type="not-a-knot")
    w = spline(np.linspace(20.0, 21.0, 201)[:-1], 1)
    return float(np.sqrt(np.mean(np.sum(w * w, axis=1))))


@functools.lru_cache(maxsize=1)
def _smoother_gain_table() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Noise figures of the smoothing against log10(lambda), for unit white noise.

    The smoothing acts in the interior like the filter ``H(w) = 1 / (1 + lambda (2
    sin(w/2))^(2d))`` on a unit grid.  Returns ``log10(lambda)`` and, by Parseval:

    * the RMS slope noise ``sqrt((1/pi) int_0^pi w^2 H^2 dw)``;
    * the RMS value noise ``sqrt((1/pi) int_0^pi H^2 dw)``;
    * for the residual ``(1 - H)`` of white noise, the ratio of the RMS of its running mean
      over :func:`_structure_width` points to its own RMS (the running mean of width ``m``
      has the response ``sin(m w / 2) / (m sin(w / 2))``).
    """
    w = np.linspace(0.0, np.pi, 4001)[1:]
    dw = w[1] - w[0]
    log_lam = np.arange(math.log10(_LAMBDA_MIN), math.log10(_LAMBDA_MAX) + 1e-9, 0.0625)
    lam = 10.0 ** log_lam
    h = 1.0 / (1.0 + np.multiply.outer(lam, (2 * np.sin(w / 2)) ** (2 * _SMOOTH_ORDER)))
    slope = np.sqrt((w * w * h * h).sum(axis=1) * dw / np.pi)
    value = np.sqrt((h * h).sum(axis=1) * dw / np.pi)
    m = _structure_width(lam)[:, None].astype(np.float64)
    avg = (np.sin(m * w / 2) / (m * np.sin(w / 2))) ** 2
    r2 = (1.0 - h) ** 2
    ratio = np.sqrt((avg * r2).sum(axis=1) / r2.sum(axis=1))
    return log_lam, slope, value, ratio


def _structure_width(lam: np.ndarray) -> np.ndarray:
    """Pulses averaged by the structure test: a quarter of the smoothing's span, 4 to 256."""
    return np.clip(np.rint(0.25 * _half_power_period(np.asarray(lam, dtype=np.float64))), 4,
                   256).astype(np.int64)


def _table_at(lam: np.ndarray, column: int) -> np.ndarray:
    """Column ``column`` of :func:`_smoother_gain_table` at penalty weights ``lam``."""
    table = _smoother_gain_table()
    return np.interp(np.log10(np.clip(lam, _LAMBDA_MIN, _LAMBDA_MAX)), table[0], table[column])


def _lambda_for_gain(gain: np.ndarray) -> np.ndarray:
    """Penalty weight whose slope noise gain is ``gain`` (clipped to the table's range)."""
    log_lam, g = _smoother_gain_table()[:2]
    return 10.0 ** np.interp(-np.log(gain), -np.log(g), log_lam)


def _half_power_period(lam: np.ndarray) -> np.ndarray:
    """Period (pitches) of the variation the smoothing with weight ``lam`` halves."""
    s = np.minimum(0.5 * lam ** (-1.0 / (2 * _SMOOTH_ORDER)), 1.0)
    return 2 * np.pi / (2 * np.arcsin(s))


def _penalty_bands(n_grid: int, lam_rows: np.ndarray) -> np.ndarray:
    """Upper banded form of D' diag(lam_rows) D, D the differences of order _SMOOTH_ORDER."""
    d = _SMOOTH_ORDER
    dc = np.array([(-1) ** (d - i) * math.comb(d, i) for i in range(d + 1)], dtype=np.float64)
    ab = np.zeros((d + 1, n_grid))
    m = n_grid - d
    for k in range(d + 1):
        for a in range(d + 1 - k):
            ab[d - k, a + k:a + k + m] += lam_rows * (dc[a] * dc[a + k])
    return ab


def _smooth_times(counts: np.ndarray, y: np.ndarray, lam_grid: np.ndarray,
                  weights: np.ndarray | None = None) -> np.ndarray:
    """Penalised least-squares smoothing of ``y`` (columns) against the pitch counts.

    Minimises ``sum w (y - z)^2 + sum lam (D^d z)^2`` (``w`` = ``weights``, default 1) over
    ``z`` on every pitch position from
    the first count to the last (positions without a pulse carry no data, Eilers 2003); the
    system is solved for the residual ``r = y - z``, which is small, so a long record (times
    of thousands of seconds) loses no precision even with heavy smoothing.
    """
    d = _SMOOTH_ORDER
    idx = counts - counts[0]
    n_grid = int(idx[-1]) + 1
    lam_rows = sliding_window_view(lam_grid, d + 1).mean(axis=1)
    ab = _penalty_bands(n_grid, lam_rows)
    ab[d, idx] += 1.0 if weights is None else weights
    if len(idx) < n_grid:   # fill positions without a pulse; any filling gives the same z,
        g = np.arange(n_grid, dtype=np.float64)     # a smooth one keeps the right-hand side small
        full = np.column_stack([np.interp(g, idx.astype(np.float64), col) for col in y.T])
        full[idx] = y
    else:
        full = y
    dc = np.array([(-1) ** (d - i) * math.comb(d, i) for i in range(d + 1)], dtype=np.float64)
    m = n_grid - d
    v = lam_rows[:, None] * sum(dc[i] * full[i:i + m] for i in range(d + 1))
    rhs = np.zeros(full.shape)
    for i in range(d + 1):
        rhs[i:i + m] += dc[i] * v
    resid = solveh_banded(ab, rhs, check_finite=False)
    return y - resid[idx]


def _speed_noise(counts: np.ndarray, z_noise: np.ndarray, pitch_s: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Relative speed error of the fit through noise replicates, at pulses and mid-intervals.

    Returns the evaluation points (pitch counts) and the RMS over the replicates there.
    """
    c = counts.astype(np.float64)
    x = np.empty(2 * len(c) - 1)
    x[0::2] = c
    x[1::2] = 0.5 * (c[1:] + c[:-1])
    from scipy.interpolate import make_interp_spline

    # The not-a-knot cubic interpolating spline (as CubicSpline), in B-spline form: faster.
    slope = make_interp_spline(c, z_noise, k=3)(x, nu=1)
    rel = slope / np.interp(x, c, pitch_s)[:, None]
    return x, np.sqrt(np.mean(rel * rel, axis=1))


@dataclass(frozen=True)
class _TimingResult:
    """What :func:`_pulse_timing` found: the times to fit and the timing."""

    times: np.ndarray          # pulse times to fit (smoothed or not), all pulses
    timing: PulseTiming
    knots: np.ndarray | None = None   # pulses the angle fit needs (None: all)
    outliers: np.ndarray = field(default_factory=lambda: np.empty(0))  # times given no weight


def _sample_step(t: np.ndarray) -> float:
    """The sample interval when the pulse times fall on a regular grid, else NaN.

    A square tacho edge (no sample on the edge itself) is timed to the sample it falls on,
    whatever the interpolation: the pulse times then differ by whole sample intervals, and
    the timing error is uniform within +-half a sample.
    """
    if len(t) < 12:
        return math.nan
    d2 = np.abs(np.diff(t, n=2))
    scale = float(np.max(np.abs(t)))
    step = d2[d2 > 1e-9 * scale]
    if len(step) < 10:
        return math.nan
    q = float(np.min(step))
    k = d2 / q
    if np.mean(np.abs(k - np.rint(k)) < 1e-3) < 0.99:
        return math.nan
    return q


def _pulses(k: int) -> str:
    return f"{k} pulse" if k == 1 else f"{k} pulses"


def _spans(bad: np.ndarray, t_eval: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start and end times of the runs of ``bad``, widened to the neighbouring points."""
    starts = np.flatnonzero(bad & ~np.concatenate(([False], bad[:-1])))
    ends = np.flatnonzero(bad & ~np.concatenate((bad[1:], [False])))
    return (t_eval[np.maximum(starts - 1, 0)],
            t_eval[np.minimum(ends + 1, len(t_eval) - 1)])


def _block_rms(x: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """RMS of the rows of ``x`` (all columns together) within each block of rows."""
    sq = (x * x).sum(axis=1) if x.ndim == 2 else x * x
    cols = x.shape[1] if x.ndim == 2 else 1
    sums = np.add.reduceat(sq, edges[:-1])
    return np.sqrt(sums / (np.diff(edges) * cols))


def _running_mean(x: np.ndarray, width: np.ndarray) -> np.ndarray:
    """Centred running mean of the rows of ``x`` over ``width`` rows (per row; shorter at ends)."""
    c = np.concatenate((np.zeros((1,) + x.shape[1:]), np.cumsum(x, axis=0)))
    i = np.arange(len(x))
    lo = np.maximum(i - width // 2, 0)
    hi = np.minimum(i + width // 2 + 1, len(x))
    d = (hi - lo).astype(np.float64)
    return (c[hi] - c[lo]) / (d[:, None] if x.ndim == 2 else d)


def _quadratic_trend(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Least-squares quadratic in ``x`` through ``y`` (normal equations on a scaled abscissa)."""
    u = 2.0 * x / x[-1] - 1.0
    y0 = y[0]
    v = np.vstack((np.ones_like(u), u, u * u))
    coef = np.linalg.solve(v @ v.T, v @ (y - y0))
    return coef[0] + u * (coef[1] + u * coef[2]) + y0


def _detector_bias(t: np.ndarray, resid: np.ndarray, rate_hz: float) -> np.ndarray | None:
    """The edge detector's bias as a function of sub-sample phase, where it shows; else None.

    The detector times an edge by linear interpolation between the two samples around the
    trigger level; on a band-limited or ramped edge its error depends on where the edge falls
    between samples (the sub-sample phase ``frac(t x rate)``).  Where the pitch is close to a
    whole number of samples that phase barely moves and the error becomes a slow drift the
    smoothing would take for speed.  The residuals of a first smoothing are regressed on three
    harmonics of the sub-sample phase per block of 4096 pulses (normal equations, all blocks
    at once); a block's fit counts where its RMS stands above three times what pure jitter
    gives (``sqrt(6 / n)`` of the residual scale).
    """
    n = len(t)
    if n < 64:
        return None
    phase = 2 * np.pi * np.mod(t * rate_hz, 1.0)
    basis = np.stack([f(m * phase) for m in (1, 2, 3) for f in (np.cos, np.sin)], axis=1)
    blocks = max(1, int(round(n / 4096)))
    edges = np.linspace(0, n, blocks + 1).astype(np.int64)
    which = np.repeat(np.arange(blocks), np.diff(edges))
    k = basis.shape[1]
    gram = np.empty((blocks, k, k))
    rhs = np.empty((blocks, k))
    for i, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
        gram[i] = basis[a:b].T @ basis[a:b]
        rhs[i] = basis[a:b].T @ resid[a:b]
    gram += 1e-12 * np.eye(k) * np.trace(gram, axis1=1, axis2=2)[:, None, None]
    coef = np.linalg.solve(gram, rhs[:, :, None])[:, :, 0]
    fit = np.einsum("ij,ij->i", basis, coef[which])
    size = np.diff(edges).astype(np.float64)
    fit_rms = np.sqrt(np.add.reduceat(fit * fit, edges[:-1]) / size)
    noise = np.sqrt(np.add.reduceat((resid - fit) ** 2, edges[:-1]) / size)
    clear = fit_rms > 3.0 * noise * np.sqrt(k / size)
    if not clear.any():
        return None
    return np.where(clear[which], fit, 0.0)


def _smooth_local(c0: np.ndarray, y: np.ndarray, lam: np.ndarray, z: np.ndarray,
                  changed: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Smoothing re-solved where the weights changed (``changed``, per pulse), in segments.

    The smoothing's influence fades within a few of its spans, so each run of changed pulses
    is solved on a segment padded by six spans (and 32 pulses) each side and the middle of it
    replaces ``z``; when most pulses changed, the whole record is solved again.
    """
    n = len(c0)
    if not changed.any():
        return z
    if changed.mean() > 0.3:
        grid = np.arange(int(c0[-1]) + 1, dtype=np.float64)
        return _smooth_times(c0, y, np.interp(grid, c0.astype(np.float64), lam), weights)
    period = _half_power_period(lam)
    idx = np.flatnonzero(changed)
    cut = np.flatnonzero(np.diff(idx) > 1)
    starts = np.concatenate(([idx[0]], idx[cut + 1]))
    ends = np.concatenate((idx[cut], [idx[-1]])) + 1
    z = z.copy()
    for a, b in zip(starts, ends):
        pad = int(min(n, 6 * float(period[max(0, a - 1):min(n, b + 1)].max()) + 32))
        a0, b0 = max(0, a - pad), min(n, b + pad)
        c = c0[a0:b0] - c0[a0]
        grid = np.arange(int(c[-1]) + 1, dtype=np.float64)
        part = _smooth_times(c, y[a0:b0], np.interp(grid, c.astype(np.float64), lam[a0:b0]),
                             None if weights is None else weights[a0:b0])
        lo = 0 if a0 == 0 else max(0, a - pad // 2)
        hi = n if b0 == n else min(n, b + pad // 2)
        z[lo:hi] = part[lo - a0:hi - a0]
    return z


def _inertia_cap(cf: np.ndarray, pitch: np.ndarray, sig: np.ndarray,
                 tolerance: float) -> np.ndarray:
    """Largest penalty weight per pulse whose rounding-off of the speed stays in tolerance.

    A shaft's inertia bounds how fast its speed changes; the sharpest change a run-up gives is
    its start from rest, where the pulse time grows as the square root of the count ``c``
    (constant angular acceleration).  For ``t = sqrt(c)`` the smoothing (response ``1 -
    lambda w^8`` at low frequency) errs on the slope by ``lambda t^(9) / t' = 7918 lambda /
    c^8`` (relative; 7918 = 2 x 1 x 3 x ... x 15 / 2^9), so ``lambda <= tolerance c^8 /
    7918``.  ``c`` is read from the data as ``1 / (2 g)``, ``g`` the rate of change of the log
    pitch per count (for ``t = sqrt(c)``, ``g = 1 / (2 c)``), the largest of its estimates over
    3, 9 and 33 pulses that stands clear of the jitter (three times its noise); a steady or
    slowly sweeping shaft (g ~ 0) is not capped.
    """
    n = len(cf)
    lp = np.log(pitch)
    i = np.arange(n)
    g = np.zeros(n)
    for half in (1, 4, 16):
        if n < 2 * half + 1:
            break
        a = np.clip(i - half, 0, n - 1)
        b = np.clip(i + half, 0, n - 1)
        span = np.maximum(cf[b] - cf[a], 1.0)
        est = np.abs(lp[b] - lp[a]) / span - 3.0 * 2.0 * (sig / pitch) / span
        g = np.maximum(g, est)
    with np.errstate(divide="ignore", over="ignore"):
        cap = tolerance * (0.5 / g) ** 8 / 7918.0
    return np.where(np.isfinite(cap), cap, _LAMBDA_MAX)


def _end_noise(c0: np.ndarray, sig: np.ndarray, pitch: np.ndarray, lam: np.ndarray,
               u: np.ndarray) -> None:
    """Raise ``u`` (relative speed noise per pulse) near the ends to what a Monte Carlo
    propagation through the same smoothing and fit gives there (the smoothing sees one side
    only); in place."""
    n = len(c0)
    for side in (0, 1):
        idx = np.arange(n) if side == 0 else np.arange(n)[::-1]
        reach = int(np.clip(4 * _half_power_period(lam[idx[0]]), 16, n))
        part = np.sort(idx[:reach])
        c = c0[part] - c0[part[0]]
        rng = np.random.default_rng(_MC_SEED + side)
        noise = rng.standard_normal((len(part), _MC_REPLICATES)) * sig[part, None]
        grid = np.arange(int(c[-1]) + 1, dtype=np.float64)
        z = _smooth_times(c, noise, np.interp(grid, c.astype(np.float64), lam[part]))
        x_eval, mc = _speed_noise(c, z, pitch[part])
        mc = np.maximum(mc[0::2], np.concatenate((mc[1::2], mc[-1:])))
        near = part[:reach // 2] if side == 0 else part[reach - reach // 2:]
        near_mc = mc[:reach // 2] if side == 0 else mc[reach - reach // 2:]
        u[near] = np.maximum(u[near], near_mc)


def _merged_spans(t_a: np.ndarray, t_b: np.ndarray, *, span_s: float) -> list:
    """Spans (t_a, t_b) joined where less than 2 % of ``span_s`` (or 0.5 s) separates them."""
    out: list = []
    join = max(0.02 * span_s, 0.5)
    for a, b in zip(t_a.tolist(), t_b.tolist()):
        if out and a - out[-1][1] <= join:
            out[-1] = (out[-1][0], max(out[-1][1], b))
        else:
            out.append((a, b))
    return out


def _pulse_timing(t: np.ndarray, counts: np.ndarray, *, pulses_per_rev: int,
                  tolerance: float, rate_hz: float | None = None) -> _TimingResult:
    """Estimate the pulse timing jitter; smooth the pulse times as far as the tolerance asks.

    Parameters
    ----------
    t : ndarray, shape (n,)
        Kept pulse times (s).
    counts : ndarray of int, shape (n,)
        Pitch count of each pulse (strictly increasing).
    pulses_per_rev : int
        Pitches per revolution.
    tolerance : float
        Speed tolerance, RMS relative (a fraction).

    Returns
    -------
    _TimingResult
        The times to fit and the :class:`PulseTiming`; a :class:`FoldlineWarning` names the
        seconds where the speed uncertainty exceeds the tolerance.
    """
    n = len(t)
    step_s = _sample_step(t)
    if n < _JITTER_ORDERS[0] + 8:
        return _TimingResult(t, PulseTiming(math.nan, math.nan, math.nan, tolerance=tolerance,
                                            sample_step_s=step_s))
    edges = _block_edges(n)
    centres, sig_b = _jitter_by_block(counts, t, len(edges) - 1)
    if not np.isfinite(sig_b).all():
        return _TimingResult(t, PulseTiming(math.nan, math.nan, math.nan, tolerance=tolerance,
                                            sample_step_s=step_s))
    # Floors: near a whole number of samples per pitch neighbouring timing errors are alike and
    # the differences miss them; edges timed only to the sample are uniform within +-half a
    # sample (standard deviation step / sqrt(12)).
    floor = _JITTER_FLOOR_FRACTION * float(np.median(sig_b))
    if math.isfinite(step_s):
        floor = max(floor, step_s / math.sqrt(12.0))
    if rate_hz is not None:
        floor = max(floor, _DETECTOR_FLOOR / rate_hz)
    sig_b = np.maximum(sig_b, floor)
    block = np.clip(np.searchsorted(edges, np.arange(n), side="right") - 1, 0, len(sig_b) - 1)
    sig = np.interp(np.arange(n), centres, sig_b)
    pitch_int = np.diff(t) / np.diff(counts)              # seconds per pitch, per interval
    pitch = np.interp(np.arange(n), np.arange(n - 1) + 0.5, pitch_int)
    u_raw = _interpolant_speed_gain() * sig / pitch
    jitter = float(np.median(sig_b))
    raw_rms = float(np.sqrt(np.mean(u_raw * u_raw)))
    angle_raw = float(np.sqrt(np.mean((sig / pitch) ** 2))) / pulses_per_rev
    cf = (counts - counts[0]).astype(np.float64)
    if u_raw.max() <= _SMOOTH_ABOVE_FRACTION * tolerance:
        timing = PulseTiming(jitter, raw_rms, float(u_raw.max()), 0.0, raw_rms, angle_raw,
                             tolerance, step_s)
        return _TimingResult(t, timing)

    # Penalty weight per pulse: the least smoothing that brings the speed noise to the target.
    target = _SMOOTH_TARGET_FRACTION * tolerance
    lam = np.clip(_lambda_for_gain(target * pitch / np.maximum(sig, 1e-300)),
                  _LAMBDA_MIN, _LAMBDA_MAX)
    lam = np.where(u_raw <= target, _LAMBDA_MIN, lam)
    lam = np.minimum(lam, _inertia_cap(cf, pitch, sig, tolerance))
    # At the ends the smoothing sees one side only and rounds a changing speed off more: its
    # weight is eased over the last span at each end (to 1/16 at the very end).
    to_end = np.minimum(cf, cf[-1] - cf)
    ease = np.clip(to_end / _half_power_period(lam), 0.5, 1.0) ** (_SMOOTH_ORDER)
    lam = np.maximum(lam * ease, _LAMBDA_MIN)
    c0 = counts - counts[0]
    # Remove a quadratic in the count (no change to the result: the penalty ignores it).
    trend = _quadratic_trend(cf, t)
    y = (t - trend)[:, None]
    grid = np.arange(int(c0[-1]) + 1, dtype=np.float64)
    mid = (edges[:-1] + edges[1:]) // 2
    factor = np.ones(n)
    lam_now = np.maximum(lam, _LAMBDA_MIN)
    z = _smooth_times(c0, y, np.interp(grid, cf, lam_now))
    if rate_hz is not None and not math.isfinite(step_s):
        bias = _detector_bias(t, (y - z)[:, 0], rate_hz)
        if bias is not None:
            t = t - bias
            y = y - bias[:, None]
            z = _smooth_times(c0, y, np.interp(grid, cf, lam_now))
    # A pulse timed far off the smoothed curve (many times the jitter: an edge the detector
    # misjudged) while its neighbours are not is given almost no weight, so it does not bend
    # the speed around it.
    weights = np.ones(n)
    resid = (y - z)[:, 0]
    mag = np.abs(resid)
    side = np.maximum(np.concatenate(([0.0], mag[:-1])), np.concatenate((mag[1:], [0.0])))
    far = (mag > _OUTLIER_SIGMAS * sig) & (side < 0.5 * mag)      # isolated, not a bend
    outliers = np.empty(0)
    if far.any() and far.sum() <= 0.01 * n:
        weights[far] = 1e-6
        z = _smooth_local(c0, y, lam_now, z, far, weights)
        outliers = t[far]
    else:
        far[:] = False
    for attempt in range(_SMOOTH_PASSES + 1):
        if attempt:
            changed = factor != previous
            lam_now = np.maximum(lam * factor, _LAMBDA_MIN)
            z = _smooth_local(c0, y, lam_now, z, changed, weights)
        if attempt == _SMOOTH_PASSES:
            break
        previous = factor.copy()
        resid = np.where(far, 0.0, (y - z)[:, 0])
        if math.isfinite(step_s):
            # Edges timed only to the sample: each time is within half a sample of the edge, so
            # a smoothed time further than that from its pulse has left the true speed.
            bad = np.abs(resid) > _QUANTISED_SLACK * 0.5 * step_s
        else:
            # Residuals averaged over a quarter of the smoothing's span: pure jitter averages
            # away (to the ratio the smoothing's response gives white noise), speed the
            # smoothing removed does not: per block, relative to the residuals' own scale (a
            # misjudged jitter does not matter), and per pulse, where the average stands far
            # out of the jitter (a kink: the speed starts to change abruptly).
            ratio = _table_at(lam_now, 3)
            avg = _running_mean(resid, _structure_width(lam_now))
            own = _block_rms(avg, edges) / np.maximum(_block_rms(resid, edges), 1e-300)
            bad = (own > _STRUCTURE_RATIO_MAX * ratio[mid])[block]
            bad |= np.abs(avg) > _KINK_SIGMAS * ratio * sig
        bad &= lam * factor > _LAMBDA_MIN
        if not bad.any():
            break
        # Smooth less around each pulse that showed it, over half the smoothing's span.
        reach = np.maximum(4, np.rint(0.5 * _half_power_period(lam_now))).astype(np.int64)
        idx = np.flatnonzero(bad)
        mark = np.zeros(n + 1)
        np.add.at(mark, np.maximum(idx - reach[idx], 0), 1.0)
        np.add.at(mark, np.minimum(idx + reach[idx] + 1, n), -1.0)
        near = np.cumsum(mark)[:n] > 0
        factor = np.where(near, factor / _LAMBDA_STEP, factor)
    smooth_t = z[:, 0] + trend
    # Speed and angle noise the smoothing leaves: its interior response (Parseval); near the
    # ends, where it sees one side only, by propagating simulated jitter through the same
    # smoothing and fit (Monte Carlo, JCGM 101:2008).
    u = _table_at(lam_now, 1) * sig / pitch
    angle_noise = _table_at(lam_now, 2) * sig / pitch
    _end_noise(c0, sig, pitch, lam_now, u)
    angle_unc = float(np.sqrt(np.mean(angle_noise ** 2))) / pulses_per_rev
    bad = u > tolerance
    beyond = tuple(_merged_spans(*_spans(bad, t), span_s=float(t[-1] - t[0]))) \
        if bad.any() else ()
    smoothed = lam_now > _LAMBDA_MIN
    period = _half_power_period(lam_now)
    span = float(np.median(period[smoothed] * pitch[smoothed])) if smoothed.any() else 0.0
    timing = PulseTiming(jitter, float(np.sqrt(np.mean(u * u))), float(u.max()), span,
                         raw_rms, angle_unc, tolerance, step_s, beyond)
    if beyond:
        where = ("; edges timed only to the sample (" + _duration(step_s) + ")"
                 if math.isfinite(step_s) else "")
        warnings.warn(
            f"the speed from the tacho is uncertain by up to {_pct(float(u.max()))} % "
            f"(RMS, {_pct(timing.speed_uncertainty)} % over the record) in "
            f"{_span_list(beyond)}, beyond the speed tolerance of {_pct(tolerance)} %: timing "
            f"jitter about {_duration(jitter)} RMS{where}, "
            + (f"pulse times smoothed over about {_duration(span)}"
               if smoothed.any() else "pulse times interpolated"),
            FoldlineWarning, stacklevel=3)
    # Knots: the smoothed curve holds nothing faster than its span, so a knot every eighth of
    # it (in pitches) reproduces it; unsmoothed stretches keep every pulse.
    step = np.maximum(1, np.floor(period / 8.0)).astype(np.int64)
    knots = np.flatnonzero(np.diff(c0 // step, prepend=-1) != 0)
    if knots[-1] != n - 1:
        knots = np.append(knots, n - 1)
    return _TimingResult(smooth_t, timing, knots, outliers)


def speed_tolerance_for(max_order: float, revs_per_block: float) -> float:
    """Default speed tolerance from the error budget of order analysis (RMS, a fraction).

    Parameters
    ----------
    max_order : float
        Highest order of interest (the order spectrum's top, ``samples_per_rev / 2.56`` by
        default).
    revs_per_block : float
        Revolutions per FFT block (order resolution = 1 / revs_per_block).

    Returns
    -------
    float
        ``1 / (8 max_order revs_per_block)``.

    Notes
    -----
    A relative speed error ``e`` held over one FFT block of ``R`` revolutions makes the shaft
    angle drift by ``e R`` revolutions across the block; at order ``K`` that is a phase walk of
    ``360 K e R`` degrees, which spreads the order's line over ``K e R`` bins of the order
    resolution.  The tolerance keeps the walk at the highest order of interest within an
    eighth of a cycle (45 degrees, an eighth of a bin of smearing): a Hann-windowed block then
    loses at most 0.09 dB of that order's amplitude (computed; a quarter cycle would lose 0.35
    dB).  The budget is pessimistic for wheels with many teeth, whose smoothed speed error
    changes sign within a block.  With the defaults (order 100, 16 revolutions per block) it
    is 7.8e-5 (0.0078 %).

    Examples
    --------
    >>> round(100 * speed_tolerance_for(100.0, 16.0), 5)
    0.00781
    """
    max_order = checks.real(None, "max_order", max_order)
    revs_per_block = checks.real(None, "revs_per_block", revs_per_block)
    if max_order <= 0 or revs_per_block <= 0:
        raise InputError(f"max_order {max_order!r} and revs_per_block {revs_per_block!r}: "
                         "allowed: both > 0")
    return 1.0 / (8.0 * max_order * revs_per_block)


#: Speed tolerance when none is given: the budget of :func:`speed_tolerance_for` at order 100
#: (256 samples per revolution / 2.56) and 16 revolutions per block.
DEFAULT_SPEED_TOLERANCE = 1.0 / (8.0 * 100.0 * 16.0)
