"""Fold map: where every line of the machine shows after sampling, and where it hits a band.

A *fold map* evaluates, for every line on a speed grid, its true frequency, the apparent
frequency after sampling at ``rate_hz``, its Nyquist zone, the anti-alias filter's attenuation
at the true frequency and the *residual* (source level minus attenuation).  *Collisions* are
contiguous rpm intervals where a folded line (zone >= 1) whose residual is above the plan's
threshold lies inside a band; a direct (zone 0) line inside a band is an *overlap*.  Interval
edges are refined by root finding (``scipy.optimize.brentq``) so they do not depend on the grid.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.optimize import brentq

from workbench.errors import InputError
from workbench.sampling.folding import apparent_frequency, nyquist_zone

__all__ = ["FoldMap", "fold_map", "find_collisions", "COLLISION_COLUMNS"]

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

    @property
    def apparent_hz(self) -> np.ndarray:
        """Apparent frequency of each line after sampling, Hz, shape (L, S)."""
        if "apparent" not in self._cache:
            self._cache["apparent"] = apparent_frequency(self.true_hz, self.rate_hz)
        return self._cache["apparent"]

    @property
    def zone(self) -> np.ndarray:
        """Nyquist zone floor(f / (rate/2)) of each line, shape (L, S); 0 is direct."""
        if "zone" not in self._cache:
            self._cache["zone"] = nyquist_zone(self.true_hz, self.rate_hz)
        return self._cache["zone"]

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


def _check_rate(rate_hz) -> float:
    rate = float(rate_hz)
    if not np.isfinite(rate) or rate <= 0:
        raise InputError(f"rate_hz = {rate_hz!r}: the sample rate must be a positive number of Hz")
    return rate


def fold_map(lines, plan, rate_hz, *, n_speeds=2000, rpm=None, filter=None) -> FoldMap:
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
    rate = _check_rate(rate_hz)
    if rpm is None:
        if int(n_speeds) < 2:
            raise InputError(f"n_speeds = {n_speeds!r}: need at least 2 speeds on the grid")
        rpm = np.linspace(plan.speed.rpm_min, plan.speed.rpm_max, int(n_speeds))
    rpm = np.asarray(rpm, dtype=float)
    filt = plan.filter if filter is None else filter
    orders, fixed, _ = _line_arrays(lines)
    true = _true_hz(orders, fixed, rpm)
    att = np.asarray(filt.attenuation_db(true, rate), dtype=float)
    return FoldMap(
        rpm=rpm,
        lines=lines,
        rate_hz=rate,
        true_hz=true,
        attenuation_db=att,
        filter_label=filt.describe() if hasattr(filt, "describe") else str(filt.kind),
    )


def _runs(mask):
    """Start and stop indices (inclusive) of each run of True in a 1-D boolean array."""
    padded = np.concatenate(([False], mask, [False]))
    d = np.diff(padded.astype(np.int8))
    starts = np.flatnonzero(d == 1)
    stops = np.flatnonzero(d == -1) - 1
    return starts, stops


class _Probe:
    """Scalar evaluation of one line against one band at any speed (for edge refinement)."""

    def __init__(self, line, band, lines, filt, rate, level, threshold):
        self.line, self.band, self.lines = line, band, lines
        self.filt, self.rate, self.level, self.threshold = filt, rate, level, threshold

    def values(self, rpm):
        r = np.atleast_1d(np.asarray(rpm, dtype=float))
        f = np.asarray(self.line.hz_at(r), dtype=float) * np.ones_like(r)
        app = apparent_frequency(f, self.rate)
        lo, hi = self.band.limits_hz(r, self.lines)
        att = np.minimum(np.asarray(self.filt.attenuation_db(f, self.rate), dtype=float), _FINITE_DB)
        res = self.level - att
        zone = nyquist_zone(f, self.rate)
        return f, app, np.broadcast_to(lo, r.shape), np.broadcast_to(hi, r.shape), res, zone

    def conditions(self, rpm):
        """Signed distances: in-band from below, in-band from above, residual over threshold."""
        _, app, lo, hi, res, _ = self.values(rpm)
        return np.stack([app - lo, hi - app, res - self.threshold])

    def zone_edges(self, a, b):
        """Speeds strictly between a and b where the line crosses a multiple of Nyquist."""
        order = self.line.order
        if order is None or order <= 0:
            return []
        nyq = self.rate / 2.0
        fa, fb = order * a / 60.0, order * b / 60.0
        k_lo, k_hi = int(np.floor(min(fa, fb) / nyq)) + 1, int(np.floor(max(fa, fb) / nyq))
        return [k * nyq * 60.0 / order for k in range(k_lo, k_hi + 1) if a < k * nyq * 60.0 / order < b]

    def edge(self, inside, outside):
        """Speed between ``inside`` (in the interval) and ``outside`` where the interval ends.

        The end is the crossing nearest ``inside`` among: the apparent frequency leaving the
        band at either limit, the residual falling to the threshold, and the line crossing a
        multiple of Nyquist (a zone change, found analytically).
        """
        a, b = float(inside), float(outside)
        lo, hi = min(a, b), max(a, b)
        ca = self.conditions(a)[:, 0]
        cb = self.conditions(b)[:, 0]
        roots = list(self.zone_edges(lo, hi))
        for j in range(3):
            if ca[j] >= 0 > cb[j]:
                def g(r, j=j):
                    return float(self.conditions(r)[j, 0])

                roots.append(brentq(g, lo, hi, xtol=1e-9, rtol=1e-12))
        if not roots:
            return a
        return min(roots, key=lambda r: abs(r - a))


def find_collisions(lines, plan, rate_hz, *, fmap=None, n_speeds=2000, threshold_db=None, refine=True):
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
        Residual above which a folded line counts (default: the plan's ``threshold_db``).
    refine : bool, optional
        Refine interval edges by root finding (default True).

    Returns
    -------
    pandas.DataFrame
        One row per line, band and contiguous interval of constant zone, columns
        :data:`COLLISION_COLUMNS` plus ``kind`` (``"collision"`` for folded lines, ``"overlap"``
        for direct lines) and ``true_hz_min``, ``true_hz_max``; sorted by residual, highest
        first.  A band's own reference line (``around``) is not reported against it.
    """
    if hasattr(lines, "lines") and callable(lines.lines):
        lines = lines.lines()
    lines = tuple(lines)
    if fmap is None:
        fmap = fold_map(lines, plan, rate_hz, n_speeds=n_speeds)
    thr = plan.threshold_db if threshold_db is None else float(threshold_db)
    rpm = fmap.rpm
    app, zone, res = fmap.apparent_hz, fmap.zone, fmap.residual_db
    rows = []
    for band in plan.bands:
        lo, hi = band.limits_hz(rpm, lines)
        lo = np.broadcast_to(np.asarray(lo, dtype=float), rpm.shape)
        hi = np.broadcast_to(np.asarray(hi, dtype=float), rpm.shape)
        inside = (app >= lo[None, :]) & (app <= hi[None, :]) & (res > thr)
        own = getattr(band, "around", None)
        for i in np.flatnonzero(inside.any(axis=1)):
            line = lines[i]
            if own is not None and line.name == own:
                continue
            probe = _Probe(line, band, lines, plan.filter, fmap.rate_hz, float(line.level_db), thr)
            # Split at zone changes: a run is contiguous in speed and constant in zone.
            zi = zone[i]
            mask = inside[i]
            seg_break = np.concatenate(([False], zi[1:] != zi[:-1]))
            starts, stops = _runs(mask)
            for s0, s1 in zip(starts, stops):
                cuts = [s0] + [k for k in range(s0 + 1, s1 + 1) if seg_break[k]] + [s1 + 1]
                for a_idx, b_idx in zip(cuts[:-1], cuts[1:]):
                    lo_i, hi_i = a_idx, b_idx - 1
                    r_lo, r_hi = rpm[lo_i], rpm[hi_i]
                    if refine:
                        if lo_i > 0:
                            r_lo = probe.edge(rpm[lo_i], rpm[lo_i - 1])
                        if hi_i < len(rpm) - 1:
                            r_hi = probe.edge(rpm[hi_i], rpm[hi_i + 1])
                    dense = np.linspace(r_lo, r_hi, 9)
                    dense = np.union1d(dense, rpm[lo_i : hi_i + 1])
                    f, a_hz, _, _, rr, zz = probe.values(dense)
                    rows.append(
                        {
                            "line": line.name,
                            "band": band.name,
                            "rpm_min": float(r_lo),
                            "rpm_max": float(r_hi),
                            "zone": int(zi[lo_i]),
                            "apparent_hz_min": float(np.min(a_hz)),
                            "apparent_hz_max": float(np.max(a_hz)),
                            "residual_db": float(np.max(rr)),
                            "kind": "collision" if zi[lo_i] >= 1 else "overlap",
                            "true_hz_min": float(np.min(f)),
                            "true_hz_max": float(np.max(f)),
                        }
                    )
    columns = list(COLLISION_COLUMNS) + ["kind", "true_hz_min", "true_hz_max"]
    table = pd.DataFrame(rows, columns=columns)
    if len(table):
        table = table.sort_values(["residual_db", "line", "rpm_min"], ascending=[False, True, True])
        table = table.reset_index(drop=True)
    return table
