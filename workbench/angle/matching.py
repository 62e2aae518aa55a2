"""Identify measured order-map ridges with the machine's predicted lines, folded ones included.

After computed order tracking a direct line of order ``k`` stays at order ``k`` at every speed.
A line folded by the time sampling (true frequency above Nyquist) was already at its apparent
frequency ``|f - m * rate|`` when it was sampled, so in the angle domain it shows at the
*apparent order* ``|f - m * rate| / f_rot``, which moves with speed.  Matching every ridge
point (rpm, order) of an order map against the predicted direct and apparent orders of every
line at that speed tells the analyst which peaks are the machine and which are aliases.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from workbench import checks
from workbench.errors import InputError
from workbench.sampling.folding import fold

__all__ = ["find_ridges", "predicted_orders", "match_lines", "identify_order_map", "Identification",
           "unmatched_ridges",
           "RIDGE_FLOOR_DB", "RIDGES_PER_BLOCK"]

#: A ridge point must stand this far above its block's median amplitude, dB ...
RIDGE_FLOOR_DB = 20.0
#: ... and at most this many are kept per block: enough that folded lines, weaker than the
#: direct mesh family after the anti-alias filter, are among them.
RIDGES_PER_BLOCK = 60


def find_ridges(rpm, order, amplitude, *, floor_db=20.0, max_per_block=12, min_order=None,
                window=None, n_window=None):
    """Local maxima of each order-map block that stand above the block's noise floor.

    Parameters
    ----------
    rpm : array_like, shape (B,)
        Speed of each block, rpm.
    order : array_like, shape (K,)
        Order axis.
    amplitude : array_like, shape (B, K)
        Order-map amplitudes (linear units).
    floor_db : float, optional
        A peak must exceed the block's median amplitude by this many dB (default 20).
    max_per_block : int, optional
        Keep at most this many peaks per block, strongest first.
    min_order : float, optional
        Ignore orders below this (default: the second bin, to skip DC).
    window : str or tuple, optional
        The map's FFT window; with it the amplitude is refined between bins by the estimator
        of the order spectrum's peaks (:func:`~workbench.angle.spectra.peak_amplitude`), so a
        ridge and the spectrum's peak of a steady line read the same.  Without it the peak
        bin's amplitude is given.
    n_window : int, optional
        Samples per block of the map (with ``window``; without it the parabola's vertex).

    Returns
    -------
    pandas.DataFrame
        Columns ``rpm, order, amplitude`` (one row per ridge point), orders refined by
        parabolic interpolation of the log amplitude over three bins (Grandke, IEEE Trans.
        Instrum. Meas. 32(2):350-355, 1983).
    """
    rpm = np.asarray(rpm, dtype=float)
    order = np.asarray(order, dtype=float)
    amp = np.asarray(amplitude, dtype=float)
    if amp.ndim != 2 or amp.shape != (rpm.size, order.size):
        raise InputError(
            f"amplitude has shape {amp.shape}; expected (len(rpm), len(order)) = ({rpm.size}, {order.size})"
        )
    if order.size < 3:
        return pd.DataFrame({"rpm": [], "order": [], "amplitude": []})
    lo_bin = 1 if min_order is None else int(np.searchsorted(order, min_order))
    lo_bin = max(lo_bin, 1)
    tiny = np.finfo(float).tiny
    logs = np.log(np.maximum(amp, tiny))
    centre = amp[:, 1:-1]
    is_peak = (centre > amp[:, :-2]) & (centre >= amp[:, 2:])
    floor = np.median(amp[:, lo_bin:], axis=1, keepdims=True)
    is_peak &= centre > floor * 10.0 ** (floor_db / 20.0)
    is_peak[:, : max(lo_bin - 1, 0)] = False
    rows_b, cols = np.nonzero(is_peak)
    k = cols + 1
    a, b, c = logs[rows_b, k - 1], logs[rows_b, k], logs[rows_b, k + 1]
    denom = a - 2 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        delta = np.where(denom < 0, 0.5 * (a - c) / denom, 0.0)
    delta = np.clip(delta, -0.5, 0.5)
    step = order[1] - order[0]
    peak = amp[rows_b, k]
    if window is not None:
        from workbench.angle.spectra import peak_amplitude

        db = 20.0 / np.log(10.0)
        peak = peak_amplitude(peak, db * a, db * b, db * c, delta, window=window, n_window=n_window)
    table = pd.DataFrame({"rpm": rpm[rows_b], "order": order[k] + delta * step, "amplitude": peak})
    table = table.sort_values(["rpm", "amplitude"], ascending=[True, False])
    table = table.groupby("rpm", sort=True, group_keys=False).head(max_per_block)
    return table.reset_index(drop=True)


def predicted_orders(lines, rate_hz, rpm):
    """Where each line shows in the angle domain after time sampling at ``rate_hz``.

    Parameters
    ----------
    lines : sequence of Line
    rate_hz : float
        Sample rate of the recording, Hz.
    rpm : array_like, shape (S,)
        Reference speeds, rpm (positive).

    Returns
    -------
    apparent_order : ndarray, shape (L, S)
        Apparent frequency divided by the shaft speed.
    zone : ndarray of int, shape (L, S)
        Nyquist zone of the true frequency (0 = direct).
    true_hz : ndarray, shape (L, S)
    """
    rpm = np.atleast_1d(np.asarray(rpm, dtype=float))
    if np.any(rpm <= 0):
        raise InputError("rpm: speeds must be positive to express frequencies in orders")
    f_rot = rpm / 60.0
    orders = np.array([np.nan if ln.order is None else ln.order for ln in lines], dtype=float)
    fixed = np.array([np.nan if ln.hz is None else ln.hz for ln in lines], dtype=float)
    true = np.where(np.isnan(orders)[:, None], fixed[:, None], orders[:, None] * f_rot[None, :])
    app, zone = fold(true, float(rate_hz))
    return app / f_rot[None, :], zone, true


@dataclass(frozen=True)
class Identification:
    """Measured ridges matched to predicted lines.

    Attributes
    ----------
    points : pandas.DataFrame
        One row per ridge point: ``rpm, order, amplitude, line, zone, alias, error_orders``
        (``line`` is None where no predicted line lies within the tolerance).
    table : pandas.DataFrame
        One row per matched predicted line and zone: ``line, kind, zone, alias, points,
        rpm_min, rpm_max, order_min, order_max, amplitude_max``, aliases first, then by
        amplitude.
    unexplained : pandas.DataFrame
        Ridge points no predicted line explains.
    unmatched : pandas.DataFrame or None
        The unexplained points joined into lines (:func:`~workbench.angle.ridges.group_ridges`:
        ``id, family, moves_with_speed, order, hz, ..., amplitude_max``); None when not grouped.
    min_order : float
        Lowest order matched (two bins of the order map): below it a line is not resolved
        from its neighbours and DC, so it is neither matched nor given an amplitude.
    below_resolution : tuple of str
        Predicted order lines below ``min_order`` (listed, not matched).
    """

    points: pd.DataFrame
    table: pd.DataFrame
    unexplained: pd.DataFrame
    unmatched: pd.DataFrame | None = None
    min_order: float = 0.0
    below_resolution: tuple = ()

    @property
    def aliases(self) -> pd.DataFrame:
        """Rows of :attr:`table` that are folded lines."""
        return self.table[self.table["alias"]]


def match_lines(ridges, lines, rate_hz, *, tolerance_orders=0.15, tolerance_pct=1.0, min_points=2,
                min_order=0.0, rpm_span=0.0):
    """Match ridge points of an order map to the machine's predicted lines.

    Parameters
    ----------
    ridges : pandas.DataFrame
        Columns ``rpm, order, amplitude`` (e.g. from :func:`find_ridges`).
    lines : sequence of Line or Machine
    rate_hz : float
        Sample rate of the recording, Hz.
    tolerance_orders : float, optional
        Absolute matching tolerance, orders (use about the order resolution).
    tolerance_pct : float, optional
        Relative matching tolerance, percent of the predicted order; the larger of the two
        tolerances applies.
    min_points : int, optional
        A predicted line is listed in the table only when at least this many ridge points
        match it.
    min_order : float, optional
        Resolution limit, orders (use two bins of the map): ridge points below it are dropped
        and no prediction below it is matched, so an order the map cannot resolve (a
        low-speed shaft at 0.075 with 0.0625-order bins) takes no amplitude from DC leakage
        or a neighbour.
    rpm_span : float, optional
        Speed range one ridge point stands for (one block or rpm bin of the map), rpm: a line
        whose predicted order changes with speed (a folded line) is matched anywhere within
        the orders it takes over that range, plus the tolerance, since the block's spectrum
        smears it over them.

    Returns
    -------
    Identification

    Notes
    -----
    Each ridge point is given the nearest predicted order (direct or folded) at its speed.
    Where a direct and a folded prediction are both within tolerance, the nearer wins; the
    table then lets the analyst see whether a peak in a fault band is the fault or an alias.
    """
    if hasattr(lines, "lines") and callable(lines.lines):
        lines = lines.lines()
    lines = tuple(lines)
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    min_order = float(min_order)
    pts = ridges[["rpm", "order", "amplitude"]]
    pts = pts[pts["order"] >= min_order].reset_index(drop=True).copy()
    names = np.array([ln.name for ln in lines], dtype=object)
    kinds = np.array([ln.kind for ln in lines], dtype=object)
    if len(pts) and len(lines):
        r = pts["rpm"].to_numpy()
        app, zone, _ = predicted_orders(lines, rate, r)
        o = pts["order"].to_numpy()[None, :]
        err = np.abs(app - o)
        if rpm_span > 0:  # distance to the orders the line takes over the block's speed range
            lo_r = np.maximum(r - 0.5 * rpm_span, 1e-9)
            a1, _, _ = predicted_orders(lines, rate, lo_r)
            a2, _, _ = predicted_orders(lines, rate, r + 0.5 * rpm_span)
            a_lo, a_hi = np.minimum(np.minimum(a1, a2), app), np.maximum(np.maximum(a1, a2), app)
            reach = np.where((o >= a_lo) & (o <= a_hi), 0.0, np.minimum(np.abs(o - a_lo), np.abs(o - a_hi)))
        else:
            reach = err
        tol = np.maximum(tolerance_orders, app * tolerance_pct / 100.0)
        # accepted within the tolerance of the orders the line takes over the block; among the
        # accepted lines the one whose order at the block's centre is nearest wins
        err = np.where((reach <= tol) & (app >= min_order), err, np.inf)
        best = np.argmin(err, axis=0)
        col = np.arange(len(pts))
        found = np.isfinite(err[best, col])
        pts["line"] = np.where(found, names[best], None)
        pts["kind"] = np.where(found, kinds[best], None)
        pts["zone"] = np.where(found, zone[best, col], -1)
        pts["alias"] = found & (zone[best, col] >= 1)
        pts["error_orders"] = np.where(found, err[best, col], np.nan)
    else:
        for c, v in (("line", None), ("kind", None), ("zone", -1), ("alias", False), ("error_orders", np.nan)):
            pts[c] = pd.Series([v] * len(pts), dtype=object if v is None else None)
    matched = pts[pts["line"].notna()]
    if len(matched):
        g = matched.groupby(["line", "zone"], sort=False)
        table = g.agg(
            kind=("kind", "first"),
            points=("order", "size"),
            rpm_min=("rpm", "min"),
            rpm_max=("rpm", "max"),
            order_min=("order", "min"),
            order_max=("order", "max"),
            amplitude_max=("amplitude", "max"),
        ).reset_index()
        table["alias"] = table["zone"] >= 1
        table = table[table["points"] >= min_points]
        table = table.sort_values(["alias", "amplitude_max"], ascending=[False, False]).reset_index(drop=True)
        table = table[["line", "kind", "zone", "alias", "points", "rpm_min", "rpm_max", "order_min", "order_max", "amplitude_max"]]
    else:
        table = pd.DataFrame(
            columns=["line", "kind", "zone", "alias", "points", "rpm_min", "rpm_max", "order_min", "order_max", "amplitude_max"]
        )
    unexplained = pts[pts["line"].isna()][["rpm", "order", "amplitude"]].reset_index(drop=True)
    below = tuple(ln.name for ln in lines if ln.order is not None and ln.order < min_order)
    return Identification(points=pts, table=table, unexplained=unexplained, min_order=min_order,
                          below_resolution=below)


def identify_order_map(order_map, lines, rate_hz, *, floor_db=RIDGE_FLOOR_DB, max_per_block=RIDGES_PER_BLOCK,
                       samples_per_rev=None):
    """Ridges of an order map matched to predicted lines, with the project's standard settings.

    Parameters
    ----------
    order_map : object with ``rpm`` (B,), ``order`` (K,), ``amplitude`` (B, K), ``order_resolution``
    lines : sequence of Line or Machine
    rate_hz : float
        Sample rate of the recording, Hz.
    floor_db, max_per_block : float, int
        Ridge picking (see :func:`find_ridges`).
    samples_per_rev : int, optional
        Samples per revolution of the tracked signal (the block length for the amplitude
        estimator; default 256, which changes the Hann correction by far less than 0.01 dB).

    Returns
    -------
    Identification
        Matched with a tolerance of 1.5 bins of the map (at least 0.05 orders); nothing below
        two bins of the map is matched (:attr:`Identification.min_order`); ridge amplitudes
        from the order spectrum's peak estimator; the unexplained points joined into lines
        (:attr:`Identification.unmatched`).
    """
    from workbench.angle.ridges import group_ridges

    res = float(order_map.order_resolution)
    min_order = 2.0 * res
    window = getattr(order_map, "window", "hann")
    n_window = round(float(order_map.revs_per_block) * (samples_per_rev or 256))
    ridges = find_ridges(order_map.rpm, order_map.order, order_map.amplitude, floor_db=floor_db,
                         max_per_block=max_per_block, min_order=min_order, window=window,
                         n_window=n_window)
    tolerance = max(1.5 * res, 0.05)
    rpm = np.sort(np.asarray(order_map.rpm, dtype=float))
    span = float(np.median(np.diff(rpm))) if rpm.size > 2 else 0.0
    ident = match_lines(ridges, lines, rate_hz, tolerance_orders=tolerance, min_order=min_order,
                        rpm_span=max(span, 0.0))
    unmatched, _ = group_ridges(ident.unexplained, order_resolution=res,
                                min_amplitude=_floor_of(order_map))
    return replace(ident, unmatched=unmatched)


def unmatched_ridges(order_map, *, floor_db=RIDGE_FLOOR_DB, max_per_block=RIDGES_PER_BLOCK, samples_per_rev=None):
    """Ridges of an order map joined into lines when no machine is known (nothing predicted).

    Same ridge picking, resolution limit and amplitude estimator as :func:`identify_order_map`.

    Returns
    -------
    pandas.DataFrame
        :func:`~workbench.angle.ridges.group_ridges` table of every measured line.
    """
    from workbench.angle.ridges import group_ridges

    res = float(order_map.order_resolution)
    ridges = find_ridges(order_map.rpm, order_map.order, order_map.amplitude, floor_db=floor_db,
                         max_per_block=max_per_block, min_order=2.0 * res,
                         window=getattr(order_map, "window", "hann"),
                         n_window=round(float(order_map.revs_per_block) * (samples_per_rev or 256)))
    return group_ridges(ridges, order_resolution=res, min_amplitude=_floor_of(order_map))[0]


def _floor_of(order_map) -> float:
    """Weakest unmatched line listed: the map's maximum UNMATCHED_RANGE_DB down."""
    from workbench.angle.ridges import UNMATCHED_RANGE_DB

    amp = np.asarray(order_map.amplitude, dtype=float)
    top = float(np.nanmax(amp)) if amp.size and np.isfinite(amp).any() else 0.0
    return top * 10.0 ** (-UNMATCHED_RANGE_DB / 20.0)
