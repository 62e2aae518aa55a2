"""Pulse times to shaft angle: :func:`tacho_angle`.

:func:`tacho_angle` assigns each pulse its shaft angle (handling missing-tooth wheels, double
triggers, glitches and lost pulses), estimates the pulse timing jitter (smoothing the pulse
times when it would reach the speed, see :class:`~workbench.angle.pulse_timing.PulseTiming`)
and fits a smooth angle curve through them, a :class:`~workbench.angle.shaft_angle.ShaftAngle`.

Conventions: times in seconds from the first sample of the record (sample ``n`` is at
``n / rate_hz``), shaft angle in revolutions, speed in rpm at the user's edge.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from workbench import checks
from workbench.checks import show
from workbench.angle._common import one_d
from workbench.angle.pulse_timing import (DEFAULT_SPEED_TOLERANCE, _OUTLIER_SIGMAS, PulseTiming,
                                          _pulse_timing, _pulses, _span_list)
from workbench.angle.shaft_angle import FIT_METHODS, DoubtedPulses, ShaftAngle
from workbench.errors import FoldlineWarning, InputError, TachoError

__all__ = [
    "tacho_angle",
]

# Window (pulse intervals) of the running median that predicts each interval.
_PITCH_WINDOW = 9


# --------------------------------------------------------------------------------------------
# Pulse times -> shaft angle
# --------------------------------------------------------------------------------------------

def _local_pitch(dt: np.ndarray) -> np.ndarray:
    """Running median of the pulse intervals: the interval each one is predicted to be.

    The ends are padded by odd reflection, which carries a trend on: a run-up from rest,
    whose first intervals shrink fast, keeps its centre values as predictions (the median of
    a monotone window is its centre).
    """
    w = _PITCH_WINDOW
    if len(dt) <= w:
        return np.full(len(dt), np.median(dt))
    pad = w // 2
    ext = np.pad(dt, pad, mode="reflect", reflect_type="odd")
    ext = np.maximum(ext, 0.5 * float(np.min(dt)))
    return np.partition(sliding_window_view(ext, w), pad, axis=1)[:, pad]


def _remove_extra_pulses(t: np.ndarray, tol: float) -> tuple[np.ndarray, list, list]:
    """Drop double triggers and glitches: pulses that split an interval into non-whole parts."""
    keep = np.ones(len(t), dtype=bool)
    times, reasons = [], []
    for _ in range(50):
        idx = np.flatnonzero(keep)
        tk = t[idx]
        if len(tk) < 4:
            break
        dt = np.diff(tk)
        p = _local_pitch(dt)
        r = dt / p
        nr = np.rint(r)
        bad = (nr < 1) | (np.abs(r - nr) > tol)
        cand = np.flatnonzero(bad)
        if len(cand) == 0:
            break
        cand = cand[np.argsort(r[cand], kind="stable")]
        touched = np.zeros(len(dt), dtype=bool)
        removed_any = False
        for i in cand:
            lo_i, hi_i = max(i - 1, 0), min(i + 2, len(dt))
            if touched[lo_i:hi_i].any():
                continue
            best = None
            for kind, j0 in (("prev", i - 1), ("next", i)):
                if j0 < 0 or j0 + 1 >= len(dt):
                    continue
                merged = (dt[j0] + dt[j0 + 1]) / p[i]
                n = np.rint(merged)
                dev = abs(merged - n)
                if n >= 1 and dev <= tol and (best is None or dev < best[0]):
                    best = (dev, kind, j0)
            if best is None:
                continue
            _, kind, j0 = best
            drop = j0 + 1            # the pulse between intervals j0 and j0 + 1
            keep[idx[drop]] = False
            times.append(tk[drop])
            reasons.append(f"extra pulse removed (double trigger or glitch): it split an "
                           f"interval of {dt[j0] / p[i] + dt[j0 + 1] / p[i]:.2f} pitches into "
                           f"{dt[j0] / p[i]:.2f} + {dt[j0 + 1] / p[i]:.2f}")
            touched[max(j0 - 1, 0):min(j0 + 3, len(dt))] = True
            removed_any = True
        if not removed_any:
            break
    return keep, times, reasons


def _unusable(message: str, t_a: np.ndarray, t_b: np.ndarray) -> TachoError:
    spans = ", ".join(f"{a:.3f}-{b:.3f} s" for a, b in zip(t_a[:5], t_b[:5]))
    more = f" and {len(t_a) - 5} more" if len(t_a) > 5 else ""
    return TachoError(f"{message}: unusable seconds {spans}{more}; check the tacho channel, its "
                      "pulses per rev and missing pulses, or give the speed another way")


def _lost_in_a_row(dt: np.ndarray, i: int, n_i: int, tolerance: float) -> bool:
    """True when interval ``i`` is a whole number of pitches between regular neighbours.

    The three intervals on each side must each be one pitch (within ``tolerance``) of the
    median of those six, and interval ``i`` must be ``n_i`` of those pitches (within
    ``tolerance``): the wheel turned at a steady speed and a few pulses were lost, unless
    the shaft slowed to a fraction of its speed for exactly one interval and came back.
    """
    if i < 3 or i + 4 > len(dt) or not 3 <= n_i <= 6:
        return False
    side = np.concatenate((dt[i - 3:i], dt[i + 1:i + 4]))
    pitch = float(np.median(side))
    return bool(np.all(np.abs(side / pitch - 1.0) <= tolerance)
                and abs(dt[i] / pitch - n_i) <= tolerance)


def _break_reasons(tk, dt, r, n, too_long, slow, tolerance, m_miss, min_rpm) -> str:
    """Why the speed is unknown across the intervals ``too_long`` (longer than a lost pulse,
    or slower than ``min_rpm``).

    Intervals of a few whole pitches between regular neighbours are named as pulses lost in a
    row; the others as a stop, an abrupt slow-down or a reversal.
    """
    idx = np.flatnonzero(too_long)
    lost = np.array([not slow[i] and _lost_in_a_row(dt, int(i), int(n[i]), tolerance)
                     for i in idx], dtype=bool)
    parts = []
    if lost.any():
        names = []
        for i in idx[lost][:5]:
            k = int(n[i]) - 1 - m_miss
            what = (f"{k} consecutive pulses missing" if m_miss == 0 else
                    f"at least {k} consecutive pulses missing besides the gap")
            names.append(f"{what} at {tk[i]:.3f} s (an interval of {r[i]:.2f} pitches between "
                         "regular pulses)")
        more = f" and {lost.sum() - 5} more" if lost.sum() > 5 else ""
        parts.append("; ".join(names) + more + ": more than one lost pulse in a row cannot be "
                     "told from an abrupt slow-down, so the interval is not bridged (check the "
                     "tacho sensor and the trigger level there)")
    if (~lost).any():
        parts.append("the shaft stopped, slowed abruptly or reversed (a pulse interval far "
                     "longer than its neighbours predict" +
                     (f", or slower than {min_rpm:g} rpm)" if min_rpm else ")"))
    return "; ".join(parts)

def tacho_angle(pulse_times_s, *, pulses_per_rev: int = 1, missing_pulses: int = 0,
                method: str = "spline", tolerance: float = 0.3,
                min_rpm: float | None = None,
                speed_tolerance: float | None = None,
                sample_rate_hz: float | None = None) -> ShaftAngle:
    """Assign each tacho pulse its shaft angle and fit the angle curve through them.

    Parameters
    ----------
    pulse_times_s : array_like, shape (n,)
        Pulse times (s), strictly increasing (from :func:`detect_pulses`).
    pulses_per_rev : int
        Tooth positions per revolution, counting missing ones (a 60-2 wheel is 60).
    missing_pulses : int
        Teeth missing in the wheel's gap (2 for a 60-2 wheel); 0 for a regular wheel or a
        once-per-revolution mark.  ``pulses_per_rev - missing_pulses`` must be at least 3
        when teeth are missing.
    method : {"spline", "quadratic"}
        Angle fit through the pulses, see :class:`ShaftAngle`.
    tolerance : float
        How far (in pitches, 0 < tolerance < 0.5) an interval may be from a whole number of
        pitches before it is doubted.
    min_rpm : float, optional
        Treat intervals slower than this (rpm) as unknown speed; default: no speed floor.
    speed_tolerance : float, optional
        RMS relative speed uncertainty (a fraction: 1e-4 is 0.01 %) the smoothing aims at and
        the warning refers to; default :data:`DEFAULT_SPEED_TOLERANCE`, the error budget of
        :func:`speed_tolerance_for` at order 100 and 16 revolutions per block.
    sample_rate_hz : float, optional
        Sample rate of the tacho channel; with it the edge detector's bias (a function of where
        an edge falls between samples) is recognised and removed.

    Returns
    -------
    ShaftAngle
        Angle fit; ``doubted`` lists removed, inferred and doubted pulses and the spans where
        the speed is unknown, with reasons; ``timing`` (a :class:`PulseTiming`) gives the
        estimated pulse timing jitter, whether the pulse times were smoothed, the speed and
        angle uncertainty left and where it exceeds the tolerance; ``gaps`` / ``stretches``
        the spans where the speed is unknown and the usable stretches between them.

    Raises
    ------
    TachoError
        Fewer pulses than a shaft angle needs (3, or two revolutions of a missing-tooth
        wheel); no stretch of the record usable; a missing-tooth gap not found or not recurring
        once per revolution in a record of one stretch.

    Warns
    -----
    FoldlineWarning
        Where the speed is unknown (a stop, an abrupt slow-down, a reversal: an interval longer
        than ``missing_pulses + 2`` pitches or slower than ``min_rpm``; two or more pulses lost
        in a row: an interval of 3 to 6 whole pitches between regular pulses), naming the
        seconds and the usable stretches, which are fitted on their own; where the speed
        uncertainty exceeds ``speed_tolerance``, with the figure and the seconds.

    Notes
    -----
    Each interval is compared with the running median of its neighbours (nine intervals, the
    pitch it is predicted to be), so the speed must change by less than about 25 % over nine
    pulses.  Then:

    * an interval much shorter than predicted (not a whole number of pitches) comes from an
      extra pulse (a double trigger or a glitch): the pulse whose removal leaves the merged
      interval closest to a whole number of pitches is dropped;
    * an interval of about two pitches hides a missing pulse: the angle advances by two
      pitches across it (no pulse time is invented);
    * on a missing-tooth wheel the gap is an interval of about ``missing_pulses + 1``
      pitches; its position within the revolution must recur once per revolution.  The first
      tooth after the gap is at a whole number of revolutions (the first one at 0); on a
      regular wheel the first pulse is at angle 0.

    A single tacho cannot tell the direction of rotation: a reversal is only caught when the
    interval around it is long compared with its neighbours (or, on a missing-tooth wheel,
    when the gap stops recurring where expected).

    **Timing jitter.**  Noise on the tacho moves each edge by a random amount; between pulses
    an interpolating fit turns that into a speed error of about 1.57 x jitter / pulse interval
    (RMS; the exact gain of the not-a-knot spline).  The jitter is estimated from the data,
    per block of 256 pulses: the ``k``-th divided differences of the pulse times against their
    pitch counts (k = 4, 6, 8), each scaled to unit noise gain, have the jitter as their
    standard deviation whatever the speed curve of degree below ``k`` (difference-based
    variance estimation, Gasser et al. 1986, Hall et al. 1990); the scale is the larger of a
    robust one (1.4826 x MAD, Hampel 1974) and the RMS without the largest 0.5 %, and the
    smallest of the three orders is kept, so a genuine speed variation is not taken for
    jitter.  Floors: half the record's median (near a whole number of samples per pitch,
    neighbouring errors are alike and the differences miss them), a hundredth of a sample
    when ``sample_rate_hz`` is given, and for edges timed only to the sample (pulse times on
    the sample grid) the uniform quantisation's ``step / sqrt(12)``.

    Where the jitter would leave an RMS speed error above half the tolerance, the pulse times
    are smoothed before the fit: a penalised least-squares fit of pulse time against pitch
    count, penalising 4th differences (a Whittaker smoother, the discrete analogue of a
    smoothing spline, Whittaker 1923, Reinsch 1967; pitch positions without a pulse carry no
    data, Eilers 2003), so cubics in angle, and with them constant jerk, pass unchanged.  The
    penalty weight is set per pulse from the jitter, the least that brings the speed noise to
    a third of the tolerance, and capped where the log pitch changes fast (a shaft's inertia
    bounds how fast its speed changes; the start of a run-up from rest, where time grows as
    the square root of the count, sets the cap).  Smoothing is reduced where it removed part
    of the speed itself: residuals averaged over a quarter of its span stand out from the
    ratio the smoothing's response gives white noise (2 x); for edges timed only to the
    sample, a smoothed time more than a sample from its pulse.  With ``sample_rate_hz`` the
    residuals are regressed on three harmonics of the sub-sample phase, and a detector bias
    that stands clear of the noise is removed.  A pulse far off the smoothed curve (8 x the
    jitter) while its neighbours are not is given no weight and listed.  The speed and angle
    uncertainty left come from the smoothing's noise response (Parseval) and, near the ends,
    from simulated jitter propagated through the same smoothing and fit (Monte Carlo, JCGM
    101:2008).  Knots of the angle fit are kept every eighth of the smoothing's span.

    References
    ----------
    .. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking", Mechanical
       Systems and Signal Processing 11(2):187-205, 1997.
    .. [2] J. R. Potter and M. Gribler, "Computed order tracking obsoletes older methods",
       SAE Technical Paper 891131, 1989.
    .. [3] T. Gasser, L. Sroka and C. Jennen-Steinmetz, "Residual variance and residual pattern
       in nonlinear regression", Biometrika 73(3):625-633, 1986.
    .. [4] P. Hall, J. W. Kay and D. M. Titterington, "Asymptotically optimal difference-based
       estimation of variance in nonparametric regression", Biometrika 77(3):521-528, 1990.
    .. [5] F. R. Hampel, "The influence curve and its role in robust estimation", Journal of
       the American Statistical Association 69(346):383-393, 1974.
    .. [6] E. T. Whittaker, "On a new method of graduation", Proceedings of the Edinburgh
       Mathematical Society 41:63-75, 1923.
    .. [7] C. H. Reinsch, "Smoothing by spline functions", Numerische Mathematik 10:177-183,
       1967.
    .. [8] P. H. C. Eilers, "A perfect smoother", Analytical Chemistry 75(14):3631-3636, 2003.
    .. [9] JCGM 101:2008, "Evaluation of measurement data - Supplement 1 to the 'Guide to the
       expression of uncertainty in measurement' - Propagation of distributions using a Monte
       Carlo method"; JCGM 100:2008 (GUM), coverage factor.

    Examples
    --------
    >>> import numpy as np
    >>> times = np.arange(0, 2, 1 / 30.0)                  # 1800 rpm, 1 pulse per rev
    >>> times = np.delete(times, 20)                       # one lost pulse
    >>> a = tacho_angle(times)
    >>> round(float(a.rpm_at(1.0)), 6), len(a.doubted)
    (1800.0, 1)
    """
    t = one_d(pulse_times_s, "pulse_times_s").astype(np.float64)
    n_pr = checks.positive_int(None, "pulses_per_rev", pulses_per_rev, whole_float=False)
    if isinstance(missing_pulses, bool) or not isinstance(missing_pulses, (int, np.integer)) \
            or missing_pulses < 0:
        raise InputError(f"missing_pulses = {show(missing_pulses)}: must be an integer "
                         ">= 0")
    m_miss = int(missing_pulses)
    if m_miss > 0 and n_pr - m_miss < 3:
        raise InputError(f"pulses_per_rev {n_pr} with missing_pulses {m_miss} leaves "
                         f"{n_pr - m_miss} teeth; allowed: at least 3 teeth on a missing-tooth "
                         "wheel (pulses_per_rev counts the missing positions too)")
    if method not in FIT_METHODS:
        raise InputError(f"method = {show(method)}: must be "
                         f"{', '.join(repr(m) for m in FIT_METHODS)}")
    tolerance = checks.real(None, "tolerance", tolerance)
    if not 0 < tolerance < 0.5:
        raise InputError(f"tolerance = {show(tolerance)}: must be 0 < tolerance < 0.5 "
                         "(pitches)")
    if min_rpm is not None:
        min_rpm = checks.real(None, "min_rpm", min_rpm)
        if min_rpm <= 0:
            raise InputError(f"min_rpm = {show(min_rpm)}: must be a speed > 0 rpm")
    if sample_rate_hz is not None:
        sample_rate_hz = checks.rate_hz(None, "sample_rate_hz", sample_rate_hz)
    if speed_tolerance is None:
        speed_tol = DEFAULT_SPEED_TOLERANCE
    else:
        speed_tol = checks.real(None, "speed_tolerance", speed_tolerance)
        if not 0 < speed_tol < 1:
            raise InputError(f"speed_tolerance = {show(speed_tolerance)}: must be a "
                             "relative speed uncertainty between 0 and 1 (1e-4 is 0.01 %)")
    if not np.isfinite(t).all():
        raise InputError("pulse_times_s holds NaN or infinite values; allowed: finite times")
    bad = np.flatnonzero(np.diff(t) <= 0)
    if len(bad):
        i = int(bad[0])
        raise InputError(f"pulse_times_s must increase strictly; entry {i + 1} ({t[i + 1]!r}) "
                         f"does not exceed entry {i} ({t[i]!r})")
    need = 3 if m_miss == 0 else 2 * (n_pr - m_miss) + 1
    if len(t) < need:
        raise TachoError(f"{len(t)} pulses are too few to find a shaft angle; allowed: at least "
                         f"{need} (two revolutions of a missing-tooth wheel, else 3)")

    d_times: list[float] = []
    d_reasons: list[str] = []
    keep, xt, xr = _remove_extra_pulses(t, tolerance)
    d_times += xt
    d_reasons += xr
    tk = t[keep]
    dt = np.diff(tk)
    p = _local_pitch(dt)
    r = dt / p
    n = np.maximum(np.rint(r), 1).astype(np.int64)
    off = np.abs(r - np.rint(r)) > tolerance
    for i in np.flatnonzero(off):
        d_times.append(float(tk[i + 1]))
        d_reasons.append(f"interval of {r[i]:.2f} pitches before this pulse is not a whole "
                         f"number of pitches; counted as {n[i]}")
    too_long = n > m_miss + 2
    slow = np.zeros_like(too_long)
    if min_rpm is not None:
        slow = (60.0 / (dt / n * n_pr)) < min_rpm
        too_long |= slow
    breaks = np.flatnonzero(too_long)
    why = (_break_reasons(tk, dt, r, n, too_long, slow, tolerance, m_miss, min_rpm)
           if len(breaks) else "")
    bounds = np.concatenate(([0], breaks + 1, [len(tk)]))
    pieces = []        # (fitted times, angles, timing) of each usable stretch
    unusable = []      # (t_a, t_b, reason) of each span where the speed is unknown
    for i in breaks:
        unusable.append((float(tk[i]), float(tk[i + 1]), why))
    for s0, s1 in zip(bounds[:-1], bounds[1:]):
        ts = tk[s0:s1]
        if len(ts) < need:
            if len(ts) > 1:
                unusable.append((float(ts[0]), float(ts[-1]), f"{_pulses(len(ts))} between "
                                 f"breaks, too few to find a shaft angle (at least {need})"))
            continue
        n_s, r_s, dt_s = n[s0:s1 - 1], r[s0:s1 - 1], dt[s0:s1 - 1]
        c = np.concatenate(([0], np.cumsum(n_s)))
        if m_miss == 0:
            for i in np.flatnonzero(n_s >= 2):
                for k in range(1, n_s[i]):
                    d_times.append(float(ts[i] + k * dt_s[i] / n_s[i]))
                    d_reasons.append(f"missing pulse: angle assigned across an interval of "
                                     f"{r_s[i]:.2f} pitches")
            revs = c / n_pr
        else:
            try:
                revs = _gap_angles(ts, dt_s, r_s, n_s, c, n_pr, m_miss, d_times, d_reasons)
            except TachoError as exc:
                if len(bounds) == 2:
                    raise
                unusable.append((float(ts[0]), float(ts[-1]), str(exc)))
                continue
        fit = _pulse_timing(ts, c, pulses_per_rev=n_pr, tolerance=speed_tol,
                            rate_hz=sample_rate_hz)
        keep_k = slice(None) if fit.knots is None else fit.knots
        pieces.append((fit.times[keep_k], revs[keep_k], fit.timing))
        for time_s in fit.outliers:
            d_times.append(float(time_s))
            d_reasons.append("pulse timed far off its neighbours (more than "
                             f"{_OUTLIER_SIGMAS:g} x the timing jitter): given no weight in the "
                             "speed")
    if not pieces:
        raise _unusable(f"no stretch of the record gives a shaft angle: {why}" if why else
                        "no stretch of the record gives a shaft angle",
                        np.array([u[0] for u in unusable]), np.array([u[1] for u in unusable]))
    for t_a, t_b, reason in unusable:
        d_times.append(t_a)
        d_reasons.append(f"speed unknown from {t_a:.3f} to {t_b:.3f} s: {reason}")
    order = np.argsort(d_times, kind="stable")
    doubted = DoubtedPulses(np.asarray(d_times, dtype=np.float64)[order],
                            tuple(d_reasons[i] for i in order))
    # Stretches joined by whole revolutions, so a once-per-revolution reference keeps its phase.
    times, angles, gaps = [pieces[0][0]], [pieces[0][1]], []
    for t_s, revs, _ in pieces[1:]:
        shift = math.ceil(angles[-1][-1] + 1.0 - revs[0])
        gaps.append(sum(len(a) for a in angles) - 1)
        times.append(t_s)
        angles.append(revs + shift)
    timing = _combine_timing([pc[2] for pc in pieces], [len(pc[0]) for pc in pieces])
    angle = ShaftAngle(np.concatenate(times), np.concatenate(angles), doubted, method, timing,
                       gaps=tuple(gaps))
    if angle.rpm_min <= 0:
        bad = np.flatnonzero(angle._piece_lo <= 0)
        raise _unusable("the angle fitted through the pulses does not rise monotonically (the "
                        "speed changes too abruptly between pulses)", angle.pulse_times_s[bad],
                        angle.pulse_times_s[bad + 1])
    if unusable:
        spans = sorted((a, b) for a, b, _ in unusable)
        kept = ", ".join(f"{a:.3f}-{b:.3f} s" for a, b in angle.stretches[:5])
        more = f" and {len(angle.stretches) - 5} more" if len(angle.stretches) > 5 else ""
        warnings.warn(f"the speed is unknown in {_span_list(spans)} ({why or unusable[0][2]}); "
                      f"the usable stretches {kept}{more} are tracked on their own",
                      FoldlineWarning, stacklevel=2)
    return angle


def _combine_timing(timings: list, weights: list) -> PulseTiming:
    """One :class:`PulseTiming` for stretches fitted apart (RMS figures weighted by pulses)."""
    if len(timings) == 1:
        return timings[0]
    w = np.asarray(weights, dtype=np.float64)

    def rms(name):
        v = np.array([getattr(tm, name) for tm in timings])
        ok = np.isfinite(v)
        return float(np.sqrt(np.sum(w[ok] * v[ok] ** 2) / np.sum(w[ok]))) if ok.any() else \
            math.nan

    def mx(name):
        v = np.array([getattr(tm, name) for tm in timings])
        return float(np.nanmax(v)) if np.isfinite(v).any() else math.nan

    jit = np.array([tm.jitter_s for tm in timings])
    smooth = [tm.smoothing_s for tm in timings if tm.smoothing_s > 0]
    return PulseTiming(float(np.nanmedian(jit)) if np.isfinite(jit).any() else math.nan,
                       rms("speed_uncertainty"), mx("speed_uncertainty_max"),
                       float(np.median(smooth)) if smooth else 0.0,
                       rms("raw_speed_uncertainty"), rms("angle_uncertainty_rev"),
                       timings[0].tolerance, mx("sample_step_s"),
                       tuple(sp for tm in timings for sp in tm.beyond_tolerance_s))


def _gap_angles(tk, dt, r, n, c, n_pr, m_miss, d_times, d_reasons) -> np.ndarray:
    """Angles on a missing-tooth wheel: find the gap, check it recurs once per revolution."""
    gap_len = m_miss + 1
    cand = np.flatnonzero(n == gap_len)
    if len(cand) == 0:
        raise TachoError(f"no interval of about {gap_len} pitches (the gap of {m_miss} missing "
                         f"teeth) among {len(tk)} pulses; check pulses_per_rev ({n_pr}) and "
                         f"missing_pulses ({m_miss}), or pass missing_pulses=0 for a regular "
                         "wheel")
    phase = c[cand + 1] % n_pr
    g_star = int(np.bincount(phase, minlength=n_pr).argmax())
    n_revs = (c[-1] - c[0]) / n_pr
    agree = phase == g_star
    if agree.sum() < max(1, 0.8 * (np.floor(n_revs) - 1)):
        where = tk[cand[~agree] + 1] if (~agree).any() else tk[-1:]
        raise TachoError(f"the gap of {m_miss} missing teeth does not recur once per revolution "
                         f"({n_pr} pitches): found {agree.sum()} gaps in the expected place over "
                         f"{n_revs:.1f} revolutions; first misplaced near {where[0]:.3f} s "
                         "(a reversal, a wrong pulses_per_rev/missing_pulses, or a damaged "
                         "wheel)")
    for i in cand[~agree]:
        d_times.append(float(tk[i + 1]))
        d_reasons.append(f"interval of {r[i]:.2f} pitches where no gap is expected")

    # Count, per interval, the intermediate positions that are gap teeth.
    def gap_teeth_upto(x):
        q = x - (g_star - m_miss)
        return (q // n_pr) * m_miss + np.minimum(q % n_pr + 1, m_miss)

    inner_gap = gap_teeth_upto(c[1:] - 1) - gap_teeth_upto(c[:-1])
    lost = (n - 1) - inner_gap
    for i in np.flatnonzero(lost > 0):
        for k in range(int(lost[i])):
            d_times.append(float(tk[i] + (k + 1) * dt[i] / n[i]))
            d_reasons.append(f"missing pulse: angle assigned across an interval of {r[i]:.2f} "
                             "pitches")
    on_gap = ((c - (g_star - m_miss)) % n_pr) < m_miss
    for i in np.flatnonzero(on_gap):
        d_times.append(float(tk[i]))
        d_reasons.append("pulse counted at a missing-tooth position (counting doubtful here)")
    c_ref = c[0] + ((g_star - c[0]) % n_pr)
    return (c - c_ref) / n_pr
