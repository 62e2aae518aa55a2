"""Fold map: where every line of the machine shows after sampling, and where it hits a band.

A *fold map* evaluates, for every line on a speed grid, its true frequency, the apparent
frequency after sampling at ``rate_hz``, its Nyquist zone, the anti-alias filter's attenuation
at the true frequency and the *residual* (source level minus attenuation).  *Collisions* are
contiguous rpm intervals where a folded line (zone >= 1) whose residual is above the plan's
threshold lies inside a band; a direct (zone 0) line inside a band is an *overlap*.  Interval
edges are refined beyond the speed grid (exactly where a line meets a band limit or a zone edge,
by bracketed root finding where its residual meets the threshold), so they do not depend on it.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from workbench.checks import FieldError, choice, positive_int, rate_hz as check_rate, real_array
from workbench.errors import FoldlineWarning, InputError
from workbench.sampling.folding import fold_arrays

__all__ = ["FoldMap", "fold_map", "find_collisions", "COLLISION_COLUMNS", "COLLISION_HEADINGS",
           "COLLISION_DECIMALS", "MONOTONE_FILTERS"]

#: Column order of the collision and overlap tables (the JSON contract's keys, then ``kind``).
COLLISION_COLUMNS = (
    "line",
    "band",
    "rpm_min",
    "rpm_max",
    "zone",
    "apparent_hz_min",
    "apparent_hz_max",
    "residual_db",
)

#: Heading (with its unit) of each column of the collision table, for every display of it
#: (the report, the notebook panels); the columns after ``kind`` are the extra ones of
#: :func:`find_collisions`.
COLLISION_HEADINGS = {
    "line": "line",
    "band": "band",
    "rpm_min": "from (rpm)",
    "rpm_max": "to (rpm)",
    "zone": "zone",
    "apparent_hz_min": "apparent from (Hz)",
    "apparent_hz_max": "apparent to (Hz)",
    "residual_db": "residual (dB)",
    "kind": "kind",
    "true_hz_min": "true from (Hz)",
    "true_hz_max": "true to (Hz)",
}

#: Decimals shown for each numeric column of the collision table (rpm to the whole rpm, Hz and
#: dB to a tenth).
COLLISION_DECIMALS = {"rpm_min": 0, "rpm_max": 0, "zone": 0, "apparent_hz_min": 1,
                      "apparent_hz_max": 1, "residual_db": 1, "true_hz_min": 1,
                      "true_hz_max": 1}

# Attenuation used in place of an infinite one (ideal filter stopband) in root finding.
_FINITE_DB = 1000.0


def _line_arrays(lines):
    """Order (NaN for fixed lines), fixed Hz (NaN for order lines) and level of each line."""
    orders = np.array([np.nan if ln.order is None else float(ln.order) for ln in lines])
    fixed = np.array([np.nan if ln.hz is None else float(ln.hz) for ln in lines])
    levels = np.array([float(ln.level_db) for ln in lines])
    return orders, fixed, levels


def _true_hz(orders, fixed, rpm):
    """True frequency (L, S) of lines with ``orders``/``fixed`` at reference speeds ``rpm``."""
    rpm = np.asarray(rpm, dtype=float)
    by_order = orders[:, None] * (rpm[None, :] / 60.0)
    return np.where(np.isnan(orders)[:, None], fixed[:, None], by_order)


@dataclass(frozen=True)
class FoldMap:
    """Every line of a machine against speed, after sampling at one rate.

    Attributes
    ----------
    rpm : ndarray, shape (S,)
        Reference shaft speeds of the grid, rpm, increasing.
    lines : tuple of Line
        The lines, in the machine's order (L of them).
    rate_hz : float
        Sample rate, Hz.
    true_hz : ndarray, shape (L, S)
        True frequency of each line at each speed, Hz.
    attenuation_db : ndarray, shape (L, S)
        Anti-alias filter attenuation at the true frequency, dB (positive = attenuated).
    filter_label : str
        Human description of the filter.
    """

    rpm: np.ndarray
    lines: tuple
    rate_hz: float
    true_hz: np.ndarray
    attenuation_db: np.ndarray
    filter_label: str = ""
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def nyquist_hz(self) -> float:
        """Nyquist frequency, rate / 2, Hz."""
        return self.rate_hz / 2.0

    @property
    def names(self) -> tuple:
        """Line names, in order."""
        return tuple(ln.name for ln in self.lines)

    @property
    def level_db(self) -> np.ndarray:
        """Source level of each line, dB, shape (L,)."""
        return np.array([float(ln.level_db) for ln in self.lines])

    def _folded(self):
        if "apparent" not in self._cache:
            self._cache["apparent"], self._cache["zone"] = fold_arrays(self.true_hz, np.asarray(self.rate_hz))
        return self._cache["apparent"], self._cache["zone"]

    @property
    def apparent_hz(self) -> np.ndarray:
        """Apparent frequency of each line after sampling, Hz, shape (L, S)."""
        return self._folded()[0]

    @property
    def zone(self) -> np.ndarray:
        """Nyquist zone floor(f / (rate/2)) of each line, shape (L, S); 0 is direct."""
        return self._folded()[1]

    @property
    def residual_db(self) -> np.ndarray:
        """Level after the anti-alias filter, dB, shape (L, S): level minus attenuation."""
        return self.level_db[:, None] - self.attenuation_db + 0.0  # + 0.0: no "-0.0" shown

    @property
    def shaft_hz(self) -> np.ndarray:
        """Reference shaft speed of the grid, Hz, shape (S,)."""
        return self.rpm / 60.0

    @property
    def true_order(self) -> np.ndarray:
        """True frequency in orders of the reference shaft, shape (L, S)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.true_hz / self.shaft_hz[None, :]

    @property
    def apparent_order(self) -> np.ndarray:
        """Apparent frequency in orders of the reference shaft, shape (L, S)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.apparent_hz / self.shaft_hz[None, :]

    def to_frame(self) -> pd.DataFrame:
        """Long table, one row per line and speed: line, rpm, true_hz, apparent_hz, zone, ...

        Returns
        -------
        pandas.DataFrame
            Columns ``line, kind, rpm, true_hz, apparent_hz, apparent_order, zone,
            attenuation_db, residual_db``.
        """
        n_lines, n_speeds = self.true_hz.shape
        return pd.DataFrame(
            {
                "line": np.repeat(np.array(self.names, dtype=object), n_speeds),
                "kind": np.repeat(np.array([ln.kind for ln in self.lines], dtype=object), n_speeds),
                "rpm": np.tile(self.rpm, n_lines),
                "true_hz": self.true_hz.ravel(),
                "apparent_hz": self.apparent_hz.ravel(),
                "apparent_order": self.apparent_order.ravel(),
                "zone": self.zone.ravel(),
                "attenuation_db": self.attenuation_db.ravel(),
                "residual_db": self.residual_db.ravel(),
            }
        )


def _attenuation(filt, f, rate) -> np.ndarray:
    """The filter's attenuation (dB) of frequencies and a rate the caller has checked."""
    return np.asarray(filt._db(np.asarray(f, dtype=float), np.asarray(rate, dtype=float)),
                      dtype=float)


def fold_map(lines, plan, rate_hz, *, n_speeds=2000, rpm=None, filter=None, true_hz=None) -> FoldMap:
    """Evaluate every line across the plan's speed range after sampling at ``rate_hz``.

    Parameters
    ----------
    lines : sequence of Line or Machine
        The lines to map (a ``Machine`` is expanded with ``.lines()``).
    plan : Plan
        Gives the speed range and the anti-alias filter.
    rate_hz : float
        Sample rate, Hz.
    n_speeds : int, optional
        Number of grid speeds spanning the profile's rpm range (default 2000).
    rpm : array_like, optional
        Explicit speed grid, rpm (overrides ``n_speeds``).
    filter : AntiAliasFilter, optional
        Filter to use instead of the plan's.
    true_hz : ndarray, shape (L, S), optional
        True frequencies of the lines on this speed grid, when already known (they do not
        depend on the rate: :func:`~workbench.sampling.advise` computes them once for all
        candidate rates).

    Returns
    -------
    FoldMap

    Notes
    -----
    The apparent frequency of a line at ``f`` sampled at rate ``fs`` is
    ``|f - fs * round(f / fs)|`` and its zone ``floor(f / (fs / 2))`` (common practice, see
    Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., 2010, sec. 4.2).
    """
    if hasattr(lines, "lines") and callable(lines.lines):
        lines = lines.lines()
    lines = tuple(lines)
    rate = check_rate(None, "rate_hz", rate_hz)
    if true_hz is None:  # the advisor, which passes true_hz, warns once per candidate itself
        from workbench.sampling.guards import warn_implausible_rate

        warn_implausible_rate(rate, lines=lines, top_rpm=plan.speed.rpm_max)
    if rpm is None:
        rpm = plan.speed.rpm_grid(positive_int(None, "n_speeds", n_speeds, low=2))
    rpm = real_array(rpm, "rpm", "speeds", "rpm")
    filt = plan.filter if filter is None else filter
    if true_hz is None:
        orders, fixed, _ = _line_arrays(lines)
        true = _true_hz(orders, fixed, rpm)
    else:
        true = np.asarray(true_hz, dtype=float)
        if true.shape != (len(lines), len(rpm)):
            raise FieldError(None, "true_hz", f"must have shape (lines, speeds) = ({len(lines)}, "
                             f"{len(rpm)})", true)
    att = _attenuation(filt, true, rate)
    return FoldMap(
        rpm=rpm,
        lines=lines,
        rate_hz=rate,
        true_hz=true,
        attenuation_db=att,
        filter_label=filt.describe() if hasattr(filt, "describe") else str(filt.kind),
    )


def _apparent_in_zone(f, zone, rate):
    """Apparent frequency of true ``f`` computed with a given zone (linear in f within it)."""
    m = np.floor_divide(zone, 2)
    even = np.mod(zone, 2) == 0
    return np.where(even, f - m * rate, (m + 1) * rate - f)


class _Edges:
    """Vectorised refinement of interval edges between grid speeds, for one band.

    Within one Nyquist zone the apparent frequency of a line is linear in speed, and so are
    the band limits (fixed in Hz, fixed in orders, or around a line); where the apparent
    frequency meets a band limit is therefore found exactly by linear interpolation.  Zone
    edges are found analytically (true frequency at a multiple of Nyquist).  Where the
    residual crosses the threshold, the speed is found by bisection to 1e-9 rpm.
    """

    def __init__(self, orders, fixed, levels, band, lines, filt, rate, threshold):
        self.orders, self.fixed, self.levels = orders, fixed, levels
        self.band, self.lines, self.filt = band, lines, filt
        self.rate, self.threshold = rate, threshold

    def true_hz(self, idx, rpm):
        o = self.orders[idx]
        return np.where(np.isnan(o), self.fixed[idx], o * rpm / 60.0)

    def limits(self, rpm):
        lo, hi = self.band._limits(np.asarray(rpm, dtype=float), self.lines)
        return (np.broadcast_to(np.asarray(lo, dtype=float), rpm.shape),
                np.broadcast_to(np.asarray(hi, dtype=float), rpm.shape))

    def residual(self, idx, f):
        att = _attenuation(self.filt, f, self.rate)
        return self.levels[idx] - np.minimum(att, _FINITE_DB)

    def _threshold_speed(self, idx, a, c, ga, gc):
        """Speed in [a, c] where residual - threshold changes sign (ga >= 0 > gc).

        Regula falsi with the Illinois modification (Dowell & Jarratt, BIT 11:168-174, 1971),
        vectorised over edges; the bracket always holds the root, so a filter whose
        attenuation jumps (ideal) still converges to the jump.
        """
        lo, hi, glo, ghi = a.copy(), c.copy(), ga.copy(), gc.copy()
        side = np.zeros(len(lo), dtype=int)
        for _ in range(100):
            with np.errstate(divide="ignore", invalid="ignore"):
                x = hi - ghi * (hi - lo) / (ghi - glo)
            bad = ~np.isfinite(x) | (x - np.minimum(lo, hi) <= 0) | (np.maximum(lo, hi) - x <= 0)
            x = np.where(bad, 0.5 * (lo + hi), x)
            g = self.residual(idx, self.true_hz(idx, x)) - self.threshold
            keep_lo = g >= 0
            # Replace the end with the same sign; halve the other end's value when one end
            # has been kept twice in a row (Illinois step).
            glo = np.where(keep_lo, g, np.where(side == -1, glo / 2.0, glo))
            ghi = np.where(keep_lo, np.where(side == 1, ghi / 2.0, ghi), g)
            side = np.where(keep_lo, 1, -1)
            lo = np.where(keep_lo, x, lo)
            hi = np.where(keep_lo, hi, x)
            if np.max(np.abs(hi - lo)) < 1e-9 or np.all(np.abs(g) < 1e-10):
                break
        return np.where(np.abs(glo) <= np.abs(ghi), lo, hi)

    def refine(self, idx, a, b):
        """Edge speeds between inside speeds ``a`` and outside speeds ``b`` (arrays, per edge)."""
        idx = np.asarray(idx, dtype=int)
        a = np.asarray(a, dtype=float)
        b = np.asarray(b, dtype=float)
        if not len(idx):
            return a
        nyq = self.rate / 2.0
        fa = self.true_hz(idx, a)
        _, za = fold_arrays(fa, np.asarray(self.rate))
        o = self.orders[idx]
        moving = ~np.isnan(o) & (o > 0)
        # Nearest zone edge from a towards b (speed where f = k * Nyquist).
        up = b > a
        k = np.where(up, za + 1, za).astype(float)
        with np.errstate(divide="ignore", invalid="ignore"):
            rz = k * nyq * 60.0 / o
        has_zone_edge = moving & np.where(up, rz < b, rz > b) & np.where(up, rz > a, rz <= a)
        c = np.where(has_zone_edge, rz, b)
        best = np.where(has_zone_edge, c, np.nan)
        # Band limits: linear within [a, c] in zone za.
        fc = self.true_hz(idx, c)
        app_a = _apparent_in_zone(fa, za, self.rate)
        app_c = _apparent_in_zone(fc, za, self.rate)
        lo_a, hi_a = self.limits(a)
        lo_c, hi_c = self.limits(c)
        for ga, gc in ((app_a - lo_a, app_c - lo_c), (hi_a - app_a, hi_c - app_c)):
            cross = (ga >= 0) & (gc < 0)
            with np.errstate(divide="ignore", invalid="ignore"):
                r = a + (c - a) * ga / (ga - gc)
            best = np.where(cross & (np.isnan(best) | (np.abs(r - a) < np.abs(best - a))), r, best)
        # Residual threshold: bisection where it falls below the threshold within [a, c].
        ra = self.residual(idx, fa) - self.threshold
        rc = self.residual(idx, fc) - self.threshold
        cross = (ra >= 0) & (rc < 0)
        if cross.any():
            j = np.flatnonzero(cross)
            r = self._threshold_speed(idx[j], a[j], c[j], ra[j], rc[j])
            cur = best[j]
            best[j] = np.where(np.isnan(cur) | (np.abs(r - a[j]) < np.abs(cur - a[j])), r, cur)
        return np.where(np.isnan(best), a, best)


#: Filter kinds whose attenuation never decreases with frequency: for them the residual of a
#: line exceeds a threshold exactly below one frequency, and collisions are found in closed
#: form (``method="exact"``).
MONOTONE_FILTERS = ("none", "ideal", "butterworth", "bessel", "digital")


def find_collisions(lines, plan, rate_hz, *, fmap=None, n_speeds=2000, threshold_db=None, refine=True,
                    method="auto"):
    """Collisions and overlaps of lines with the plan's bands, as rpm intervals.

    Parameters
    ----------
    lines : sequence of Line or Machine
        Lines to check.
    plan : Plan
        Gives bands, threshold, filter and speed range.
    rate_hz : float
        Sample rate, Hz.
    fmap : FoldMap, optional
        A fold map already computed for these lines, plan and rate.
    n_speeds : int, optional
        Grid size when ``fmap`` is not given.
    threshold_db : float, optional
        Residual above which a line counts (default: the plan's ``threshold_db``).
    refine : bool, optional
        Grid method: refine interval edges beyond the grid (default True): exactly where the
        apparent frequency meets a band limit or a zone edge, by bracketed root finding where
        the residual meets the threshold.
    method : {"auto", "exact", "grid"}
        ``"exact"`` solves the intervals in closed form, with no speed grid: within one Nyquist
        zone a line's apparent frequency and a band's limits are linear in speed, and with a
        filter whose attenuation never decreases (:data:`MONOTONE_FILTERS`) the residual is
        above the threshold exactly below one frequency.  ``"grid"`` evaluates the fold map on
        a speed grid and refines the edges; it serves every filter (Chebyshev and elliptic
        ripple, tables) but cannot see an interval narrower than the grid step.  ``"auto"``
        (default) is ``"exact"`` for the monotone filter kinds and ``"grid"`` otherwise.

    Returns
    -------
    pandas.DataFrame
        One row per line, band and contiguous interval of constant zone, columns
        :data:`COLLISION_COLUMNS` plus ``kind`` (``"collision"`` for folded lines, ``"overlap"``
        for direct lines) and ``true_hz_min``, ``true_hz_max``; sorted by residual, highest
        first.  ``residual_db`` is the highest residual within the interval.  A band's own
        reference line (``around``) is not reported against it.
    """
    if hasattr(lines, "lines") and callable(lines.lines):
        lines = lines.lines()
    lines = tuple(lines)
    choice(None, "method", method, ("auto", "exact", "grid"))
    thr = plan.threshold_db if threshold_db is None else float(threshold_db)
    exact_ok = plan.filter.kind in MONOTONE_FILTERS
    if method == "exact" and not exact_ok:
        raise InputError(
            f"method 'exact' needs a filter whose attenuation never decreases ({', '.join(MONOTONE_FILTERS)}); "
            f"the plan's filter is {plan.filter.kind!r}: use method 'grid'"
        )
    if method == "exact" or (method == "auto" and exact_ok):
        if fmap is not None:
            r0, r1 = float(fmap.rpm[0]), float(fmap.rpm[-1])
            rate = fmap.rate_hz
        else:
            r0, r1 = float(plan.speed.rpm_min), float(plan.speed.rpm_max)
            rate = check_rate(None, "rate_hz", rate_hz)
        crossed = _zones_crossed(lines, rate, r0, r1)
        if crossed <= MAX_EXACT_SEGMENTS:
            return _table(_exact_rows(lines, plan, rate, thr, r0, r1))
        message = (f"the lines cross {crossed:,} Nyquist zones over {r0:g}-{r1:g} rpm at {rate:g} Hz "
                   f"(more than {MAX_EXACT_SEGMENTS:,}): check the line orders and the rate")
        if method == "exact":
            raise InputError(message + "; or use method 'grid'")
        warnings.warn(message + "; collisions found on a speed grid instead", FoldlineWarning, stacklevel=2)
    if fmap is None:
        fmap = fold_map(lines, plan, rate_hz, n_speeds=n_speeds)
    rpm = fmap.rpm
    n_grid = len(rpm)
    app, zone, res, true = fmap.apparent_hz, fmap.zone, fmap.residual_db, fmap.true_hz
    orders, fixed, levels = _line_arrays(lines)
    names = np.array([ln.name for ln in lines], dtype=object)
    frames = []
    for band in plan.bands:
        lo, hi = band.limits_hz(rpm, lines)
        lo = np.broadcast_to(np.asarray(lo, dtype=float), rpm.shape)
        hi = np.broadcast_to(np.asarray(hi, dtype=float), rpm.shape)
        inside = (app >= lo[None, :]) & (app <= hi[None, :]) & (res > thr)
        own = getattr(band, "around", None)
        if own is not None:
            inside &= (names != own)[:, None]
        rows_in = np.flatnonzero(inside.any(axis=1))
        if not len(rows_in):
            continue
        # Runs: contiguous in speed and constant in zone, per line (only lines that enter).
        inside = inside[rows_in]
        zr = zone[rows_in]
        pad = np.zeros((len(rows_in), 1), bool)
        same_zone = np.concatenate([pad, zr[:, 1:] == zr[:, :-1]], axis=1)
        starts = inside & ~(np.concatenate([pad, inside[:, :-1]], axis=1) & same_zone)
        stops = inside & ~(np.concatenate([inside[:, 1:], pad], axis=1)
                           & np.concatenate([same_zone[:, 1:], pad], axis=1))
        li, s0 = np.nonzero(starts)
        li2, s1 = np.nonzero(stops)
        li, li2 = rows_in[li], rows_in[li2]
        # np.nonzero walks row by row, so starts and stops pair up in order.
        r_lo, r_hi = rpm[s0].copy(), rpm[s1].copy()
        if refine:
            edges = _Edges(orders, fixed, levels, band, lines, plan.filter, fmap.rate_hz, thr)
            # Both ends of every run in one vectorised call.
            m_lo, m_hi = s0 > 0, s1 < n_grid - 1
            refined = edges.refine(
                np.concatenate([li[m_lo], li2[m_hi]]),
                np.concatenate([rpm[s0[m_lo]], rpm[s1[m_hi]]]),
                np.concatenate([rpm[s0[m_lo] - 1], rpm[s1[m_hi] + 1]]),
            )
            k = int(m_lo.sum())
            r_lo[m_lo], r_hi[m_hi] = refined[:k], refined[k:]
            ends = np.concatenate([r_lo, r_hi])
            idx2 = np.concatenate([li, li])
            f_end = edges.true_hz(idx2, ends)
            z_run = np.concatenate([zone[li, s0], zone[li, s0]])
            app_end = _apparent_in_zone(f_end, z_run, fmap.rate_hz)
            res_end = edges.residual(idx2, f_end)
        n = len(li)
        # Extremes over each run's grid points (segment reductions), then with the refined ends.
        lengths = s1 - s0 + 1
        offsets = np.concatenate(([0], np.cumsum(lengths)[:-1]))
        pos = np.arange(int(lengths.sum())) - np.repeat(offsets, lengths) + np.repeat(s0, lengths)
        flat = np.repeat(li, lengths) * n_grid + pos
        rows = {}
        for key, arr, fn in (("amin", app, np.minimum), ("amax", app, np.maximum), ("rmax", res, np.maximum),
                             ("fmin", true, np.minimum), ("fmax", true, np.maximum)):
            rows[key] = fn.reduceat(arr.ravel()[flat], offsets)
        if refine:
            for key, arr, fn in (("amin", app_end, np.minimum), ("amax", app_end, np.maximum),
                                 ("rmax", res_end, np.maximum), ("fmin", f_end, np.minimum),
                                 ("fmax", f_end, np.maximum)):
                rows[key] = fn(rows[key], fn(arr[:n], arr[n:]))
        z0 = zone[li, s0]
        frames.append(
            {
                "line": names[li],
                "band": np.full(n, band.name, dtype=object),
                "rpm_min": np.minimum(r_lo, r_hi),
                "rpm_max": np.maximum(r_lo, r_hi),
                "zone": z0.astype(int),
                "apparent_hz_min": rows["amin"],
                "apparent_hz_max": rows["amax"],
                "residual_db": rows["rmax"] + 0.0,
                "kind": np.where(z0 >= 1, "collision", "overlap").astype(object),
                "true_hz_min": rows["fmin"],
                "true_hz_max": rows["fmax"],
            }
        )
    return _table(frames)


_COLUMNS = list(COLLISION_COLUMNS) + ["kind", "true_hz_min", "true_hz_max"]


def _table(frames):
    """One DataFrame from per-band column dictionaries, highest residual first."""
    if not frames:
        return pd.DataFrame({c: pd.Series(dtype=object if c in ("line", "band", "kind") else float) for c in _COLUMNS})
    data = {c: np.concatenate([f[c] for f in frames]) for c in _COLUMNS}
    # Highest residual first; ties by line name, then speed.
    order = np.lexsort((data["rpm_min"], data["line"].astype(str), -data["residual_db"]))
    return pd.DataFrame({c: data[c][order] for c in _COLUMNS})


#: Most (line, Nyquist zone) segments the closed form handles; beyond, lines far above the
#: rate (a typo in an order, or a rate in kHz given as Hz) would take unbounded memory.
MAX_EXACT_SEGMENTS = 1_000_000


def _zones_crossed(lines, rate, r0, r1) -> int:
    """Number of (line, Nyquist zone) segments over the speed range."""
    orders, fixed, _ = _line_arrays(lines)
    moving = ~np.isnan(orders)
    nyq = rate / 2.0
    with np.errstate(over="ignore", invalid="ignore"):
        zones = np.where(moving, np.abs(orders) * abs(r1 - r0) / 60.0 / nyq, 0.0)
    total = float(np.sum(np.floor(zones) + 2.0))
    return int(min(total, 1e18)) if np.isfinite(total) else 10**18


def _threshold_hz(filt, rate, allowed_db):
    """Highest frequency below which the attenuation stays under ``allowed_db`` (per value).

    For a filter whose attenuation never decreases, ``att(f) < A`` holds exactly for
    ``f < f*(A)``: 0 where ``A <= att(0)``, infinity where the filter never reaches ``A``.
    Found by bisection on log frequency, vectorised over the distinct values of ``A``.
    """
    allowed = np.asarray(allowed_db, dtype=float)
    out = np.full(allowed.shape, np.inf)
    at_dc = float(_attenuation(filt, 0.0, rate))
    out[allowed <= at_dc] = 0.0
    need = np.flatnonzero(allowed > at_dc)
    if not len(need):
        return out
    a = allowed[need]
    kind = filt.kind
    if kind == "none":
        return out  # never attenuates: every positive allowance holds at every frequency
    if kind == "ideal":
        out[need] = filt.cutoff * rate  # 0 dB up to the cutoff, infinite above
        return out
    if kind == "butterworth":
        # 10 log10(1 + (f / fc)^(2n)) < A  <=>  f < fc (10^(A/10) - 1)^(1/(2n))
        out[need] = filt.cutoff * rate * np.expm1(a * math.log(10.0) / 10.0) ** (0.5 / filt.order)
        return out
    lo = np.full(len(a), np.log(rate * 1e-9))
    hi = np.full(len(a), np.log(rate * 1e9))
    reach = np.minimum(_attenuation(filt, np.exp(hi), rate), _FINITE_DB) >= a
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        below = _attenuation(filt, np.exp(mid), rate) < a
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
        if np.max(hi - lo) < 1e-13:
            break
    out[need] = np.where(reach, np.exp(0.5 * (lo + hi)), np.inf)
    return out


def _exact_rows(lines, plan, rate, thr, r0, r1):
    """Collision and overlap intervals in closed form (see :func:`find_collisions`)."""
    if not plan.bands or not lines:
        return []
    orders, fixed, levels = _line_arrays(lines)
    names = np.array([ln.name for ln in lines], dtype=object)
    nyq = rate / 2.0
    moving = ~np.isnan(orders)
    o = np.where(moving, orders, 0.0)
    # Segments: one per line and Nyquist zone crossed over [r0, r1].
    f_lo = np.where(moving, o * r0 / 60.0, fixed)
    f_hi = np.where(moving, o * r1 / 60.0, fixed)
    _, z_lo = fold_arrays(f_lo, np.asarray(rate))
    _, z_hi = fold_arrays(f_hi, np.asarray(rate))
    counts = (z_hi - z_lo + 1).astype(int)
    li = np.repeat(np.arange(len(lines)), counts)
    z = np.repeat(z_lo, counts) + (np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts))
    om = o[li]
    mv = moving[li]
    with np.errstate(divide="ignore", invalid="ignore"):
        seg_lo = np.where(mv, np.maximum(r0, z * nyq * 60.0 / om), r0)
        seg_hi = np.where(mv, np.minimum(r1, (z + 1) * nyq * 60.0 / om), r1)
    # Apparent frequency in the segment's zone: a1 * rpm + a0.
    m = np.floor_divide(z, 2)
    even = (z % 2) == 0
    a1 = np.where(mv, np.where(even, om / 60.0, -om / 60.0), 0.0)
    a0 = np.where(mv, np.where(even, -m * rate, (m + 1) * rate), _apparent_in_zone(fixed[li], z, rate))
    # Residual above the threshold below one frequency (monotone filter): an upper speed bound.
    allowed = levels - thr
    uniq, inv = np.unique(allowed, return_inverse=True)
    f_star = _threshold_hz(plan.filter, rate, uniq)[inv][li]
    with np.errstate(divide="ignore", invalid="ignore"):
        res_hi = np.where(mv, 60.0 * f_star / om, np.where(fixed[li] < f_star, np.inf, -np.inf))
    span = r1 - r0
    rr = np.array([r0, r1]) if span > 0 else np.array([r0, r0 + 1.0])
    frames = []
    for band in plan.bands:
        lo2, hi2 = band.limits_hz(rr, lines)
        lo2 = np.broadcast_to(np.asarray(lo2, dtype=float), (2,))
        hi2 = np.broadcast_to(np.asarray(hi2, dtype=float), (2,))
        # Band limits are linear in speed (fixed Hz, fixed orders, or around a line).
        l1 = (lo2[1] - lo2[0]) / (rr[1] - rr[0])
        l0 = lo2[0] - l1 * rr[0]
        h1 = (hi2[1] - hi2[0]) / (rr[1] - rr[0])
        h0 = hi2[0] - h1 * rr[0]
        p = seg_lo.copy()
        q = np.minimum(seg_hi, res_hi)
        for k1, k0 in ((a1 - l1, a0 - l0), (h1 - a1, h0 - a0)):
            # k1 * rpm + k0 >= 0
            with np.errstate(divide="ignore", invalid="ignore"):
                root = -k0 / k1
            p = np.where(k1 > 0, np.maximum(p, root), p)
            q = np.where(k1 < 0, np.minimum(q, root), q)
            q = np.where((k1 == 0) & (k0 < 0), -np.inf, q)
        keep = (q > p) if span > 0 else (q >= p)
        own = getattr(band, "around", None)
        if own is not None:
            keep &= names[li] != own
        if not keep.any():
            continue
        j = np.flatnonzero(keep)
        pj, qj = p[j], q[j]
        ends = np.concatenate([pj, qj])
        lj = np.concatenate([li[j], li[j]])
        f_end = np.where(moving[lj], orders[lj] * ends / 60.0, fixed[lj])
        app_end = np.concatenate([a1[j], a1[j]]) * ends + np.concatenate([a0[j], a0[j]])
        att_end = np.minimum(_attenuation(plan.filter, f_end, rate), _FINITE_DB)
        res_end = levels[lj] - att_end
        n = len(j)
        frames.append(
            {
                "line": names[li[j]],
                "band": np.full(n, band.name, dtype=object),
                "rpm_min": pj,
                "rpm_max": qj,
                "zone": z[j].astype(int),
                "apparent_hz_min": np.minimum(app_end[:n], app_end[n:]),
                "apparent_hz_max": np.maximum(app_end[:n], app_end[n:]),
                "residual_db": np.maximum(res_end[:n], res_end[n:]) + 0.0,
                "kind": np.where(z[j] >= 1, "collision", "overlap").astype(object),
                "true_hz_min": np.minimum(f_end[:n], f_end[n:]),
                "true_hz_max": np.maximum(f_end[:n], f_end[n:]),
            }
        )
    return frames
