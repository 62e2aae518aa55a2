"""The shaft angle against time: :class:`ShaftAngle`, its gaps and stretches, and the pulses doubted.

A :class:`ShaftAngle` is a smooth angle curve through the pulse times (fitted by
:func:`workbench.angle.pulse_angles.tacho_angle`, with the :class:`DoubtedPulses` it set aside
and the :class:`~workbench.angle.pulse_timing.PulseTiming` of its pulses);
``ShaftAngle.from_rpm`` and ``ShaftAngle.from_speed_table`` stand in for a tacho when the speed
is known instead.

Conventions: times in seconds from the first sample of the record (sample ``n`` is at
``n / rate_hz``), shaft angle in revolutions, speed in rpm at the user's edge.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from workbench import checks
from workbench.checks import show
from workbench.angle._common import one_d
from workbench.angle.pulse_timing import PulseTiming
from workbench.errors import InputError

__all__ = [
    "DoubtedPulses",
    "ShaftAngle",
    "FIT_METHODS",
]

#: Angle-fit methods of :func:`tacho_angle`.
FIT_METHODS = ("spline", "quadratic")


def _readonly(a) -> np.ndarray:
    a = np.array(a, dtype=np.float64, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class DoubtedPulses:
    """Pulses that :func:`tacho_angle` rejected, inferred or doubts, with the reason for each.

    Attributes
    ----------
    time_s : ndarray, shape (n,)
        Time of the pulse (s); for a missing pulse, the time it was expected at.
    reason : tuple of str, length n
        What was wrong and what was done, e.g. ``"missing pulse: angle assigned across an
        interval of 2.00 pitches"``.
    """

    time_s: np.ndarray
    reason: tuple[str, ...]

    def __post_init__(self):
        t = _readonly(np.atleast_1d(self.time_s))
        object.__setattr__(self, "time_s", t)
        object.__setattr__(self, "reason", tuple(str(r) for r in self.reason))
        if t.ndim != 1 or len(t) != len(self.reason):
            raise InputError(f"DoubtedPulses: time_s has {t.size} values but reason has "
                             f"{len(self.reason)}; allowed: one reason per time")

    @classmethod
    def empty(cls) -> DoubtedPulses:
        """A table with no rows."""
        return cls(np.empty(0), ())

    def __len__(self) -> int:
        return len(self.reason)

    def __iter__(self):
        return iter(zip(self.time_s.tolist(), self.reason))

    def to_frame(self):
        """The table as a pandas DataFrame with columns ``time_s`` and ``reason``."""
        import pandas as pd
        return pd.DataFrame({"time_s": self.time_s, "reason": list(self.reason)})


def _piece_speed_extremes(coef: np.ndarray, h: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Min and max of the derivative (rev/s) of each cubic piece over its interval."""
    c1, c2, c3 = coef[1], coef[2], coef[3]
    d0 = c1
    d1 = c1 + 2 * c2 * h + 3 * c3 * h * h
    lo = np.minimum(d0, d1)
    hi = np.maximum(d0, d1)
    with np.errstate(divide="ignore", invalid="ignore"):
        tv = np.where(c3 != 0, -c2 / (3 * c3), -1.0)
    inside = (tv > 0) & (tv < h)
    dv = c1 + 2 * c2 * tv + 3 * c3 * tv * tv
    lo = np.where(inside, np.minimum(lo, dv), lo)
    hi = np.where(inside, np.maximum(hi, dv), hi)
    return lo, hi


def _quadratic_pieces(t: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Fyfe & Munck pieces: on [t_j, t_j+1] the quadratic through pulses j, j+1, j+2."""
    m = len(t) - 1
    coef = np.zeros((4, m))
    if m == 1:
        coef[0] = r[0]
        coef[1] = (r[1] - r[0]) / (t[1] - t[0])
        return coef
    j = np.arange(m)
    a = np.where(j + 2 <= m, j, j - 1)           # first of the three pulses
    ta, tb, tc = t[a], t[a + 1], t[a + 2]
    ra, rb, rc = r[a], r[a + 1], r[a + 2]
    # Newton divided differences in the absolute time, then re-centred on t_j.
    f1 = (rb - ra) / (tb - ta)
    f2 = ((rc - rb) / (tc - tb) - f1) / (tc - ta)
    tj = t[j]
    # p(t) = ra + f1 (t - ta) + f2 (t - ta)(t - tb); expand around tj.
    u, v = tj - ta, tj - tb
    coef[0] = ra + f1 * u + f2 * u * v
    coef[1] = f1 + f2 * (u + v)
    coef[2] = f2
    return coef


def _fit_pieces(t: np.ndarray, r: np.ndarray, method: str) -> np.ndarray:
    """Polynomial pieces (4, n - 1), ascending powers of (t - t_j), of the angle fit."""
    if method == "spline" and len(t) > 2:
        from scipy.interpolate import CubicSpline   # imported here: it costs ~0.5 s to load

        return CubicSpline(t, r, bc_type="not-a-knot").c[::-1].copy()
    return _quadratic_pieces(t, r)


@dataclass(frozen=True, eq=False)
class ShaftAngle:
    """Shaft angle (revolutions) as a smooth function of time, fitted through tacho pulses.

    Parameters
    ----------
    pulse_times_s : array_like, shape (n,)
        Times (s) of the kept pulses, strictly increasing (n >= 2); from :func:`tacho_angle`
        with a noisy tacho (``timing.smoothed``), the smoothed pulse times.
    pulse_revs : array_like, shape (n,)
        Shaft angle (revolutions) of each pulse, strictly increasing.
    doubted : DoubtedPulses
        Pulses rejected, inferred or doubted while assigning angles.
    method : str
        ``"spline"``: not-a-knot cubic spline of angle against time (C2, de Boor 1978);
        ``"quadratic"``: on each pulse interval the quadratic (constant angular acceleration)
        through that pulse and the next two (Fyfe & Munck 1997); ``"constant speed"`` (two
        points, straight line) and ``"speed table"`` (integrated piecewise-linear speed) come
        from the constructors.
    timing : PulseTiming or None
        From :func:`tacho_angle`: the estimated pulse timing jitter, whether the pulse times
        were smoothed, and the speed uncertainty left; None for a known speed.
    gaps : tuple of int
        Pieces (the interval from knot ``j`` to knot ``j + 1``) where the speed is unknown (a
        stop, a reversal, pulses lost in a row): the angle is fitted on each side apart, the
        stretch after a gap starts a whole number of revolutions on, and :meth:`revs_at`,
        :meth:`rpm_at` and :meth:`time_at_revs` return NaN inside it.
        :meth:`stretch_angles` gives the usable stretches one by one.

    Notes
    -----
    The angle is defined from the first to the last pulse (:attr:`t_start_s`,
    :attr:`t_end_s`); outside that span (and inside a gap) :meth:`revs_at`, :meth:`rpm_at`
    and :meth:`time_at_revs` return NaN rather than extrapolate.  The fit must rise monotonically;
    :func:`tacho_angle` refuses data where it does not.

    A linear run-up (constant angular acceleration) makes the angle an exact quadratic of time;
    both fits reproduce it exactly (the not-a-knot spline reproduces cubics).  Where the
    acceleration varies, the C2 spline follows it more closely than the piecewise quadratics,
    whose slope jumps at every pulse (measured in ``tests/test_angle_tacho.py``), so it is the
    default.

    References
    ----------
    .. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking", Mechanical
       Systems and Signal Processing 11(2):187-205, 1997.
    .. [2] J. R. Potter and M. Gribler, "Computed order tracking obsoletes older methods",
       SAE Technical Paper 891131, 1989.
    .. [3] C. de Boor, "A Practical Guide to Splines", Springer, 1978 (not-a-knot end
       conditions).

    Examples
    --------
    >>> a = ShaftAngle.from_rpm(1800.0, 2.0)
    >>> float(a.revs_at(1.0)), float(a.rpm_at(0.5)), float(a.time_at_revs(15.0))
    (30.0, 1800.0, 0.5)
    """

    pulse_times_s: np.ndarray
    pulse_revs: np.ndarray
    doubted: DoubtedPulses = field(default_factory=DoubtedPulses.empty)
    method: str = "spline"
    timing: PulseTiming | None = None
    gaps: tuple = ()
    _coef: Any = field(default=None, repr=False, compare=False)

    def __post_init__(self):
        t = _readonly(self.pulse_times_s)
        r = _readonly(self.pulse_revs)
        object.__setattr__(self, "pulse_times_s", t)
        object.__setattr__(self, "pulse_revs", r)
        if t.ndim != 1 or r.shape != t.shape:
            raise InputError(f"ShaftAngle: pulse_times_s has shape {t.shape} and pulse_revs "
                             f"{r.shape}; allowed: two 1-D arrays of the same length")
        if len(t) < 2:
            raise InputError(f"ShaftAngle: {len(t)} pulse(s); allowed: at least 2")
        if not (np.isfinite(t).all() and np.isfinite(r).all()):
            raise InputError("ShaftAngle: pulse_times_s and pulse_revs must be finite numbers")
        for name, a in (("pulse_times_s", t), ("pulse_revs", r)):
            bad = np.flatnonzero(np.diff(a) <= 0)
            if len(bad):
                i = int(bad[0])
                raise InputError(f"ShaftAngle: {name} must increase strictly; entry {i + 1} "
                                 f"({a[i + 1]!r}) does not exceed entry {i} ({a[i]!r})")
        if not isinstance(self.doubted, DoubtedPulses):
            raise InputError("ShaftAngle: doubted must be a DoubtedPulses table")
        if self.timing is not None and not isinstance(self.timing, PulseTiming):
            raise InputError("ShaftAngle: timing must be a PulseTiming or None")
        methods = FIT_METHODS + ("constant speed", "speed table")
        if self.method not in methods:
            raise InputError(f"ShaftAngle: method = {show(self.method)}: must be one of "
                             f"{', '.join(repr(m) for m in methods)}")
        gaps = tuple(sorted({int(j) for j in self.gaps}))
        if any(not 0 < j < len(t) - 2 for j in gaps) or \
                any(b - a < 2 for a, b in zip(gaps[:-1], gaps[1:])):
            raise InputError(f"ShaftAngle: gaps {self.gaps!r} are not valid; allowed: indices "
                             "of pieces between knots, each stretch keeping at least 2 knots")
        object.__setattr__(self, "gaps", gaps)
        if self._coef is not None:
            coef = np.array(self._coef, dtype=np.float64)
            if coef.shape != (4, len(t) - 1):
                raise InputError("ShaftAngle: internal coefficients do not match the knots")
        elif self.method == "speed table":
            raise InputError("ShaftAngle: method 'speed table' needs ShaftAngle.from_speed_table")
        else:
            coef = np.zeros((4, len(t) - 1))
            bounds = (-1,) + gaps + (len(t) - 1,)
            for a, b in zip(bounds[:-1], bounds[1:]):
                coef[:, a + 1:b] = _fit_pieces(t[a + 1:b + 1], r[a + 1:b + 1], self.method)
            for j in gaps:        # a straight line across a gap keeps the inverse monotone
                coef[0, j] = r[j]
                coef[1, j] = (r[j + 1] - r[j]) / (t[j + 1] - t[j])
        coef.setflags(write=False)
        object.__setattr__(self, "_coef", coef)
        h = np.diff(t)
        lo, hi = _piece_speed_extremes(coef, h)
        if gaps:
            lo, hi = lo.copy(), hi.copy()
            lo[list(gaps)] = np.nan
            hi[list(gaps)] = np.nan
        object.__setattr__(self, "_piece_lo", lo)
        object.__setattr__(self, "_piece_hi", hi)

    # ---- constructors ----------------------------------------------------------------------
    @classmethod
    def from_rpm(cls, rpm: float, duration_s: float, *, start_s: float = 0.0) -> ShaftAngle:
        """Constant speed standing in for a tacho.

        Parameters
        ----------
        rpm : float
            Shaft speed (rpm), > 0.
        duration_s : float
            Length of the span (s), > 0.
        start_s : float
            Start of the span (s); the angle is 0 there.
        """
        rpm = checks.real(None, "rpm", rpm)
        if rpm <= 0:
            raise InputError(f"rpm = {show(rpm)}: must be a speed > 0 rpm")
        duration_s = checks.positive(None, "duration_s", duration_s, unit="s")
        start_s = checks.real(None, "start_s", start_s)
        return cls(np.array([start_s, start_s + duration_s]),
                   np.array([0.0, rpm / 60.0 * duration_s]), DoubtedPulses.empty(),
                   "constant speed")

    @classmethod
    def from_speed_table(cls, time_s, rpm) -> ShaftAngle:
        """Known speed against time standing in for a tacho; the angle integrates it.

        Parameters
        ----------
        time_s : array_like, shape (n,)
            Strictly increasing times (s), n >= 2.
        rpm : array_like, shape (n,)
            Speed at those times (rpm), >= 0, interpolated linearly in between; at most one
            isolated zero at the start or the end (the angle must keep rising).

        Notes
        -----
        Linear speed between table points makes the angle an exact piecewise quadratic of time
        (trapezoidal integration is exact for it); the angle is 0 at ``time_s[0]``.
        """
        t = one_d(time_s, "time_s").astype(np.float64)
        f = one_d(rpm, "rpm").astype(np.float64) / 60.0
        if t.shape != f.shape or len(t) < 2:
            raise InputError(f"time_s ({t.size} values) and rpm ({f.size} values) must have the "
                             "same length, at least 2")
        if not (np.isfinite(t).all() and np.isfinite(f).all()):
            raise InputError("time_s and rpm must be finite numbers")
        bad = np.flatnonzero(np.diff(t) <= 0)
        if len(bad):
            i = int(bad[0])
            raise InputError(f"time_s must increase strictly; entry {i + 1} ({t[i + 1]!r}) does "
                             f"not exceed entry {i} ({t[i]!r})")
        zero = np.flatnonzero(f <= 0)
        if np.any(f < 0) or np.any((zero > 0) & (zero < len(f) - 1)):
            i = int(zero[0])
            raise InputError(f"rpm = {show(rpm)}: entry {i} is {f[i] * 60:g}; allowed: speeds > 0 "
                             "(0 only at the first or last entry)")
        h = np.diff(t)
        coef = np.zeros((4, len(h)))
        coef[1] = f[:-1]
        coef[2] = 0.5 * np.diff(f) / h
        revs = np.concatenate(([0.0], np.cumsum(0.5 * (f[:-1] + f[1:]) * h)))
        coef[0] = revs[:-1]
        return cls(t, revs, DoubtedPulses.empty(), "speed table", _coef=coef)

    # ---- evaluation ------------------------------------------------------------------------
    @property
    def t_start_s(self) -> float:
        """Start of the span where the angle is known (s)."""
        return float(self.pulse_times_s[0])

    @property
    def t_end_s(self) -> float:
        """End of the span where the angle is known (s)."""
        return float(self.pulse_times_s[-1])

    @property
    def revolutions(self) -> float:
        """Revolutions turned over the usable stretches."""
        r = self.pulse_revs
        return float(r[-1] - r[0] - sum(r[j + 1] - r[j] for j in self.gaps))

    @property
    def rpm_min(self) -> float:
        """Lowest speed of the fit over the span (rpm)."""
        return float(np.nanmin(self._piece_lo) * 60.0)

    @property
    def rpm_max(self) -> float:
        """Highest speed of the fit over the span (rpm)."""
        return float(np.nanmax(self._piece_hi) * 60.0)

    @property
    def stretches(self) -> tuple:
        """(start, end) times (s) of the usable stretches: the whole span unless there are gaps."""
        t = self.pulse_times_s
        bounds = (-1,) + self.gaps + (len(t) - 1,)
        return tuple((float(t[a + 1]), float(t[b])) for a, b in zip(bounds[:-1], bounds[1:]))

    def stretch_angles(self) -> tuple:
        """The usable stretches as ShaftAngle objects of their own (this one when no gaps).

        Each keeps its pulses, angles and fit; ``doubted`` and ``timing`` are shared.
        """
        if not self.gaps:
            return (self,)
        t, r = self.pulse_times_s, self.pulse_revs
        bounds = (-1,) + self.gaps + (len(t) - 1,)
        return tuple(ShaftAngle(t[a + 1:b + 1], r[a + 1:b + 1], self.doubted, self.method,
                                self.timing, _coef=self._coef[:, a + 1:b])
                     for a, b in zip(bounds[:-1], bounds[1:]))

    def _locate(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        knots = self.pulse_times_s
        j = np.clip(np.searchsorted(knots, t, side="right") - 1, 0, len(knots) - 2)
        return j, t - knots[j]

    def _known(self, t: np.ndarray, j: np.ndarray) -> np.ndarray:
        """Where times ``t`` (in pieces ``j``) lie inside the span and outside every gap."""
        knots = self.pulse_times_s
        ok = (t >= knots[0]) & (t <= knots[-1])
        for g in self.gaps:
            ok &= ~((t > knots[g]) & (t < knots[g + 1]))
        return ok

    def revs_at(self, t_s) -> np.ndarray:
        """Shaft angle (revolutions) at times ``t_s`` (s); NaN outside the span.

        Parameters
        ----------
        t_s : array_like
            Times (s), any shape.

        Returns
        -------
        ndarray of float64, same shape as ``t_s``
        """
        t = np.asarray(t_s, dtype=np.float64)
        j, tau = self._locate(t)
        c = self._coef
        out = ((c[3, j] * tau + c[2, j]) * tau + c[1, j]) * tau + c[0, j]
        return np.where(self._known(t, j), out, np.nan)[()]

    def rpm_at(self, t_s) -> np.ndarray:
        """Shaft speed (rpm) at times ``t_s`` (s); NaN outside the span.

        Parameters
        ----------
        t_s : array_like
            Times (s), any shape.

        Returns
        -------
        ndarray of float64, same shape as ``t_s``
        """
        t = np.asarray(t_s, dtype=np.float64)
        j, tau = self._locate(t)
        c = self._coef
        out = 60.0 * ((3 * c[3, j] * tau + 2 * c[2, j]) * tau + c[1, j])
        return np.where(self._known(t, j), out, np.nan)[()]

    def _invert(self, revs: np.ndarray, iterations: int = 8) -> tuple[np.ndarray, np.ndarray]:
        """Times and speeds (rev/s) at angles ``revs``, extrapolating the end pieces."""
        kr = self.pulse_revs
        kt = self.pulse_times_s
        j = np.clip(np.searchsorted(kr, revs, side="right") - 1, 0, len(kr) - 2)
        c0, c1, c2, c3 = (self._coef[i, j] for i in range(4))
        h = kt[j + 1] - kt[j]
        tau = (revs - kr[j]) / (kr[j + 1] - kr[j]) * h        # linear first guess
        interior = (j > 0) & (j < len(kr) - 2)
        lo = np.where(interior | (j > 0), 0.0, -np.inf)
        hi = np.where(interior | (j < len(kr) - 2), h, np.inf)
        for _ in range(iterations):
            p = ((c3 * tau + c2) * tau + c1) * tau + c0 - revs
            dp = (3 * c3 * tau + 2 * c2) * tau + c1
            step = p / dp
            tau = np.clip(tau - step, lo, hi)
            if np.all(np.abs(step) <= 1e-15 * (np.abs(kt[j]) + h)):
                break
        dp = (3 * c3 * tau + 2 * c2) * tau + c1
        return kt[j] + tau, dp

    def time_at_revs(self, revs) -> np.ndarray:
        """Time (s) at which the shaft reaches angle ``revs`` (revolutions); NaN outside.

        The inverse of :meth:`revs_at`, solved per piece by safeguarded Newton iterations
        (vectorised); monotone because the fit is.

        Parameters
        ----------
        revs : array_like
            Shaft angles (revolutions), any shape.

        Returns
        -------
        ndarray of float64, same shape as ``revs``
        """
        r = np.asarray(revs, dtype=np.float64)
        flat = r.ravel()
        inside = (flat >= self.pulse_revs[0]) & (flat <= self.pulse_revs[-1])
        for g in self.gaps:
            inside &= ~((flat > self.pulse_revs[g]) & (flat < self.pulse_revs[g + 1]))
        out = np.full(flat.shape, np.nan)
        if inside.any():
            out[inside] = self._invert(flat[inside])[0]
        return out.reshape(r.shape)[()]

    # ---- helpers for the tracker ---------------------------------------------------------------
    def _speed_range_hz(self, t0: float, t1: float) -> tuple[float, float]:
        """Lowest and highest speed (rev/s) of the fit over [t0, t1] (exact for the pieces)."""
        knots = self.pulse_times_s
        j0 = int(np.clip(np.searchsorted(knots, t0, side="right") - 1, 0, len(knots) - 2))
        j1 = int(np.clip(np.searchsorted(knots, t1, side="right") - 1, 0, len(knots) - 2))
        js = np.arange(j0, j1 + 1)
        c1, c2, c3 = (self._coef[i, js] for i in (1, 2, 3))
        lo_b = np.maximum(knots[js], t0) - knots[js]
        hi_b = np.minimum(knots[js + 1], t1) - knots[js]
        hi_b = np.maximum(hi_b, lo_b)
        with np.errstate(divide="ignore", invalid="ignore"):
            tv = np.where(c3 != 0, -c2 / (3 * c3), lo_b)
        tv = np.clip(tv, lo_b, hi_b)
        cand = np.concatenate([c1 + (2 * c2 + 3 * c3 * tau) * tau for tau in (lo_b, hi_b, tv)])
        return float(cand.min()), float(cand.max())

    def _grid_times(self, k0: int, k1: int, samples_per_rev: int
                    ) -> tuple[np.ndarray, np.ndarray]:
        """Times (s) and speeds (rpm) at angles ``k / samples_per_rev`` for k in [k0, k1).

        Exact (Newton) at every ``step``-th grid angle, counted from angle 0 so the result does
        not depend on how a range is split, and cubic Hermite in between (value and slope
        dt/d(angle) matched at both ends).  The step keeps the Hermite span at 1/16 rev or
        less, where its error is orders of magnitude below the pulse timing error.
        """
        step = max(1, samples_per_rev // 8)
        g0 = (k0 // step) * step
        g1 = -((-k1) // step) * step
        if g1 == g0:
            g1 = g0 + step
        coarse = np.arange(g0, g1 + 1, step, dtype=np.float64) / samples_per_rev
        tc, fc = self._invert(coarse)
        hspan = step / samples_per_rev
        m = hspan / fc                          # dt/du at the coarse points
        basis, dbasis = _hermite_tables(step)
        # Rows: (t0 - tc0, slope0, t1 - tc0, slope1) per coarse interval; times relative to the
        # interval start keep the products well conditioned.
        rows = np.empty((len(tc) - 1, 4))
        rows[:, 0] = 0.0
        rows[:, 1] = m[:-1]
        rows[:, 2] = tc[1:] - tc[:-1]
        rows[:, 3] = m[1:]
        t = (rows @ basis + tc[:-1, None]).ravel()
        rpm = (60.0 * hspan) / (rows @ dbasis).ravel()
        s = slice(k0 - g0, k1 - g0)
        return t[s], rpm[s]


_HERMITE_CACHE: dict[int, tuple[np.ndarray, np.ndarray]] = {}


def _hermite_tables(step: int) -> tuple[np.ndarray, np.ndarray]:
    """Cubic Hermite basis (4, step) and its derivative at u = 0, 1/step, ..."""
    hit = _HERMITE_CACHE.get(step)
    if hit is None:
        u = np.arange(step) / step
        basis = np.array([2 * u ** 3 - 3 * u ** 2 + 1, u ** 3 - 2 * u ** 2 + u,
                          -2 * u ** 3 + 3 * u ** 2, u ** 3 - u ** 2])
        dbasis = np.array([6 * u ** 2 - 6 * u, 3 * u ** 2 - 4 * u + 1, -6 * u ** 2 + 6 * u,
                           3 * u ** 2 - 2 * u])
        hit = _HERMITE_CACHE[step] = (basis, dbasis)
    return hit
