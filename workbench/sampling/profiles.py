"""Speed profiles of a test: reference shaft speed (rev/min) against time (s).

A profile runs from ``t = 0`` to ``t = duration_s``.  Run-ups have ``end_rpm > start_rpm``,
coast-downs ``end_rpm < start_rpm``; a constant speed is a linear profile with equal ends.

Kinds
-----
``"linear"``
    ``rpm(t) = start + (end - start) t / T``.
``"exponential"``
    ``rpm(t) = start (end / start) ** (t / T)`` (constant relative sweep rate; both ends > 0).
``"table"``
    Piecewise linear through ``(table_time_s, table_rpm)``; the table starts at 0 s and its
    last time is the duration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
import numpy as np

from workbench.errors import InputError, where
from workbench.checks import FieldError, choice, is_number, positive_int, real, real_vector
from workbench.sampling._tables import read_numeric_csv

__all__ = ["PROFILE_KINDS", "SpeedProfile", "read_speed_table"]

PROFILE_KINDS = ("linear", "exponential", "table")

_OWNER = "SpeedProfile"


@dataclass(frozen=True)
class SpeedProfile:
    """Reference shaft speed against time during a test.

    Parameters
    ----------
    kind : {"linear", "exponential", "table"}
        Shape of the profile (see the module notes).
    start_rpm, end_rpm : float
        Speeds at ``t = 0`` and ``t = duration_s`` in rev/min: not negative, and positive for
        ``"exponential"``.  For ``"table"`` they follow from the table (leave them out, or give
        the same values).
    duration_s : float
        Length of the test in s, positive.  For ``"table"``, the table's last time.
    table_time_s : sequence of float, optional
        Times in s of a ``"table"`` profile: start at 0, strictly increasing, at least two.
    table_rpm : sequence of float, optional
        Speeds in rev/min at those times, not negative; same length.

    Raises
    ------
    InputError
        A field is missing, not allowed for the kind, or out of range; the message names it.

    Examples
    --------
    >>> from workbench.sampling import SpeedProfile
    >>> p = SpeedProfile("linear", 600.0, 3600.0, 60.0)
    >>> float(p.rpm_at(30.0)), float(p.time_at(1200.0)), p.max_sweep_rate_rpm_per_s
    (2100.0, 12.0, 50.0)
    >>> float(p.shaft_angle_rev(60.0))      # mean 2100 rev/min for one minute
    2100.0
    """

    kind: str
    start_rpm: float | None = None
    end_rpm: float | None = None
    duration_s: float | None = None
    table_time_s: tuple[float, ...] | None = None
    table_rpm: tuple[float, ...] | None = None

    def __post_init__(self):
        kind = choice(_OWNER, "kind", self.kind, PROFILE_KINDS)
        if kind == "table":
            self._check_table()
            return
        for field in ("table_time_s", "table_rpm"):
            if getattr(self, field) is not None:
                raise FieldError(_OWNER, field, f"is only used by profile kind 'table', not "
                                 f"{kind!r} (remove it)", getattr(self, field))
        for field in ("start_rpm", "end_rpm", "duration_s"):
            if getattr(self, field) is None:
                raise FieldError(_OWNER, field, f"is required by profile kind {kind!r}")
        positive = kind == "exponential"
        for field in ("start_rpm", "end_rpm"):
            value = real(_OWNER, field, getattr(self, field), low=0.0, low_open=positive)
            object.__setattr__(self, field, value)
        duration = real(_OWNER, "duration_s", self.duration_s, low=0.0, low_open=True)
        object.__setattr__(self, "duration_s", duration)

    def _check_table(self):
        for field in ("table_time_s", "table_rpm"):
            if getattr(self, field) is None:
                raise FieldError(_OWNER, field, "is required by profile kind 'table'")
        time = real_vector(_OWNER, "table_time_s", self.table_time_s, min_len=2)
        rpm = real_vector(_OWNER, "table_rpm", self.table_rpm, min_len=2)
        if len(time) != len(rpm):
            raise FieldError(_OWNER, "table_rpm", f"must have one speed per time "
                             f"({len(time)}), got {len(rpm)}", rpm)
        if time[0] != 0.0:
            raise FieldError(_OWNER, "table_time_s", "the first time must be 0 s (profile "
                             "time starts at 0)", time)
        for i in range(1, len(time)):
            if not time[i] > time[i - 1]:
                raise FieldError(_OWNER, "table_time_s", f"row {i + 1}: times must increase "
                                 "strictly", time)
        for i, r in enumerate(rpm):
            if r < 0:
                raise FieldError(_OWNER, "table_rpm", f"row {i + 1}: speeds must not be "
                                 "negative", rpm)
        derived = {"start_rpm": rpm[0], "end_rpm": rpm[-1], "duration_s": time[-1]}
        for field, value in derived.items():
            given = getattr(self, field)
            if given is not None and not (_is_real(given) and float(given) == value):
                raise FieldError(_OWNER, field, f"follows from the table of a 'table' profile "
                                 f"({value:g}) (remove it)", given)
            object.__setattr__(self, field, value)
        object.__setattr__(self, "table_time_s", time)
        object.__setattr__(self, "table_rpm", rpm)

    # -- derived values -------------------------------------------------------------------
    @property
    def rpm_min(self) -> float:
        """Lowest speed of the profile in rev/min."""
        if self.kind == "table":
            return min(self.table_rpm)
        return min(self.start_rpm, self.end_rpm)

    @property
    def rpm_max(self) -> float:
        """Highest speed of the profile in rev/min."""
        if self.kind == "table":
            return max(self.table_rpm)
        return max(self.start_rpm, self.end_rpm)

    @property
    def is_monotonic(self) -> bool:
        """True when speed rises strictly or falls strictly over the whole profile."""
        if self.kind == "table":
            d = np.diff(self.table_rpm)
            return bool(np.all(d > 0) or np.all(d < 0))
        return self.start_rpm != self.end_rpm

    @property
    def max_sweep_rate_rpm_per_s(self) -> float:
        """Largest magnitude of the sweep rate over the profile, in rev/min per s."""
        if self.kind == "linear":
            return abs(self.end_rpm - self.start_rpm) / self.duration_s
        if self.kind == "exponential":
            k = math.log(self.end_rpm / self.start_rpm) / self.duration_s
            return abs(k) * self.rpm_max
        return float(np.max(np.abs(self._table_slopes())))

    @property
    def revolutions(self) -> float:
        """Revolutions of the reference shaft over the whole profile."""
        return float(self.shaft_angle_rev(self.duration_s))

    # -- functions of time ----------------------------------------------------------------
    def _times(self, t_s) -> np.ndarray:
        try:
            t = np.asarray(t_s, dtype=float)
        except (TypeError, ValueError):
            raise FieldError(None, "t_s", "must be numbers (s)", t_s) from None
        slack = 1e-9 * self.duration_s
        bad = ~np.isfinite(t) | (t < -slack) | (t > self.duration_s + slack)
        if np.any(bad):
            raise FieldError(None, "t_s", f"times must lie within the profile, 0 to "
                             f"{self.duration_s:g} s", t[bad].flat[0].item())
        return np.clip(t, 0.0, self.duration_s)

    def _table_slopes(self) -> np.ndarray:
        return np.diff(self.table_rpm) / np.diff(self.table_time_s)

    def _segment(self, t: np.ndarray) -> np.ndarray:
        """Index of the table segment holding each time (the later one at a breakpoint)."""
        time = np.asarray(self.table_time_s)
        return np.clip(np.searchsorted(time, t, side="right") - 1, 0, len(time) - 2)

    def rpm_at(self, t_s):
        """Speed at times `t_s`.

        Parameters
        ----------
        t_s : array_like
            Times in s within ``[0, duration_s]``.

        Returns
        -------
        rpm : ndarray or float
            Speed in rev/min, same shape as `t_s`.
        """
        t = self._times(t_s)
        if self.kind == "linear":
            out = self.start_rpm + (self.end_rpm - self.start_rpm) * (t / self.duration_s)
        elif self.kind == "exponential":
            ratio = self.end_rpm / self.start_rpm
            out = self.start_rpm * ratio ** (t / self.duration_s)
        else:
            out = np.interp(t, self.table_time_s, self.table_rpm)
        return np.clip(out, self.rpm_min, self.rpm_max)[()]

    def sweep_rate_rpm_per_s(self, t_s):
        """Signed sweep rate d(rpm)/dt at times `t_s`, in rev/min per s (negative when falling).

        For ``"table"`` profiles the rate is constant on each segment; at a breakpoint the
        later segment's rate is returned (the last segment's at the end).
        """
        t = self._times(t_s)
        if self.kind == "linear":
            out = np.full(t.shape, (self.end_rpm - self.start_rpm) / self.duration_s)
        elif self.kind == "exponential":
            k = math.log(self.end_rpm / self.start_rpm) / self.duration_s
            out = k * np.asarray(self.rpm_at(t))
        else:
            out = self._table_slopes()[self._segment(t)]
        return out[()]

    def shaft_angle_rev(self, t_s):
        """Revolutions of the reference shaft from ``t = 0`` to `t_s`: the integral of rpm/60.

        Analytic for ``"linear"`` and ``"exponential"``, exact (trapezoids of a piecewise-linear
        speed) for ``"table"``.

        Parameters
        ----------
        t_s : array_like
            Times in s within ``[0, duration_s]``.

        Returns
        -------
        revs : ndarray or float
            Shaft angle in revolutions, same shape as `t_s`.
        """
        t = self._times(t_s)
        if self.kind == "linear":
            slope = (self.end_rpm - self.start_rpm) / self.duration_s
            out = (self.start_rpm * t + 0.5 * slope * t * t) / 60.0
        elif self.kind == "exponential":
            log_ratio = math.log(self.end_rpm / self.start_rpm)
            if log_ratio == 0.0:
                out = self.start_rpm * t / 60.0
            else:
                k = log_ratio / self.duration_s
                out = self.start_rpm * np.expm1(k * t) / k / 60.0
        else:
            time = np.asarray(self.table_time_s)
            rpm = np.asarray(self.table_rpm)
            slopes = self._table_slopes()
            steps = np.diff(time) * (rpm[:-1] + rpm[1:]) / 2.0
            before = np.concatenate(([0.0], np.cumsum(steps)))
            i = self._segment(t)
            dt = t - time[i]
            out = (before[i] + rpm[i] * dt + 0.5 * slopes[i] * dt * dt) / 60.0
        return out[()]

    # -- functions of speed ---------------------------------------------------------------
    def time_at(self, rpm):
        """Time at which the profile passes speed `rpm` (monotonic profiles only).

        Parameters
        ----------
        rpm : array_like
            Speeds in rev/min within ``[rpm_min, rpm_max]``.

        Returns
        -------
        t_s : ndarray or float
            Times in s, same shape as `rpm`.

        Raises
        ------
        InputError
            The profile does not rise or fall strictly (a constant speed, a dwell or a
            reversal in a table), or a speed lies outside the profile.
        """
        if not self.is_monotonic:
            raise InputError(f"{_OWNER}: time_at needs a profile whose speed rises or falls "
                             f"strictly; this {self.kind!r} profile does not (it holds a "
                             "speed, or turns back), so a speed can occur at several times")
        try:
            r = np.asarray(rpm, dtype=float)
        except (TypeError, ValueError):
            raise FieldError(None, "rpm", "must be numbers (rev/min)", rpm) from None
        lo, hi = self.rpm_min, self.rpm_max
        slack = 1e-9 * hi
        bad = ~np.isfinite(r) | (r < lo - slack) | (r > hi + slack)
        if np.any(bad):
            raise FieldError(None, "rpm", f"speeds must lie within the profile, {lo:g} to "
                             f"{hi:g} rev/min", r[bad].flat[0].item())
        r = np.clip(r, lo, hi)
        if self.kind == "linear":
            out = (r - self.start_rpm) / (self.end_rpm - self.start_rpm) * self.duration_s
        elif self.kind == "exponential":
            out = (np.log(r / self.start_rpm) / math.log(self.end_rpm / self.start_rpm)
                   * self.duration_s)
        else:
            time = np.asarray(self.table_time_s)
            speed = np.asarray(self.table_rpm)
            if speed[-1] < speed[0]:
                time, speed = time[::-1], speed[::-1]
            out = np.interp(r, speed, time)
        return np.clip(out, 0.0, self.duration_s)[()]

    def rpm_grid(self, n: int) -> np.ndarray:
        """`n` evenly spaced speeds from `rpm_min` to `rpm_max` (both included), rev/min.

        Parameters
        ----------
        n : int
            Number of speeds, at least 2.
        """
        n = positive_int(None, "n", n, low=2)
        return np.linspace(self.rpm_min, self.rpm_max, n)


def _is_real(value) -> bool:
    return is_number(value) and math.isfinite(float(value))


def read_speed_table(path) -> tuple[np.ndarray, np.ndarray]:
    """Read a speed table: a CSV file with header ``time_s,rpm``.

    Parameters
    ----------
    path : str or path-like
        The CSV file.  Columns ``time_s`` (s, strictly increasing) and ``rpm`` (rev/min, not
        negative), one row per line, no other columns.  (A :class:`SpeedProfile` built from
        the table also needs the first time to be 0 s.)

    Returns
    -------
    time_s, rpm : ndarray, shape (n,)
        The two columns as floats.

    Raises
    ------
    InputError
        The file cannot be read, lacks a column, has an unknown column, fewer than two rows, or
        a value that is empty, not a number, negative, or out of order; the message names the
        file, the line and the column.
    """
    name = str(path)
    _, values = read_numeric_csv(path, (("time_s", "rpm"),), "speed table")
    time, rpm = values["time_s"], values["rpm"]
    steps = np.diff(time)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        raise InputError(f"{where(name, f'line {i + 2}', f'time_s = {time[i]:g}')}: times must "
                         f"increase strictly; the line before gives {time[i - 1]:g}")
    if np.any(rpm < 0):
        i = int(np.argmax(rpm < 0))
        raise InputError(f"{where(name, f'line {i + 2}', f'rpm = {rpm[i]:g}')}: speeds must "
                         "not be negative")
    return time, rpm
