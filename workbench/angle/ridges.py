"""Group measured ridge points of an order map into lines an analyst can read.

A ridge point is one peak of one block of the order map: (rpm, order, amplitude).  Points that
no predicted line explains are what an analyst most wants to see, but as hundreds of points
they say nothing.  :func:`group_ridges` joins them into lines of two families:

* **order** lines keep their order while the speed changes: their frequency moves with speed
  (a shaft harmonic, a mesh, a bearing order the machine file does not hold);
* **fixed** lines keep their frequency in Hz: their order falls as the speed rises (a
  structural resonance excited by noise, an electrical line, a neighbouring machine).

Points that stay neither at one order nor at one frequency are counted but not grouped.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["group_ridges", "RIDGE_GROUP_COLUMNS", "MIN_GROUP_POINTS", "SPEED_SPAN_TO_TELL",
           "UNMATCHED_RANGE_DB"]

#: Columns of the table :func:`group_ridges` returns.
RIDGE_GROUP_COLUMNS = ("id", "family", "moves_with_speed", "order", "hz", "order_min", "order_max",
                       "hz_min", "hz_max", "rpm_min", "rpm_max", "points", "amplitude_max")

#: Fewest ridge points that make a line (one point is a peak of one block, not a line).
MIN_GROUP_POINTS = 4

#: Lines weaker than the map's maximum by more than this (dB) are not listed as unmatched.
UNMATCHED_RANGE_DB = 60.0

#: Highest / lowest speed of a group below which one cannot tell an order from a fixed line.
SPEED_SPAN_TO_TELL = 1.1


def _clusters(values: np.ndarray, tolerance: np.ndarray) -> np.ndarray:
    """Label of each value after single-link grouping of the sorted values (gap > tolerance)."""
    order = np.argsort(values, kind="stable")
    v = values[order]
    gaps = np.diff(v) > np.minimum(tolerance[order][1:], tolerance[order][:-1])
    labels_sorted = np.concatenate([[0], np.cumsum(gaps)])
    labels = np.empty_like(labels_sorted)
    labels[order] = labels_sorted
    return labels


def _summarise(pts: pd.DataFrame, family: str) -> dict:
    rpm = pts["rpm"].to_numpy()
    order = pts["order"].to_numpy()
    hz = order * rpm / 60.0
    amp = pts["amplitude"].to_numpy()
    span = float(rpm.max()) / max(float(rpm.min()), 1e-12)
    tellable = span >= SPEED_SPAN_TO_TELL
    return {
        "family": family if tellable else "unclear",
        "moves_with_speed": (family == "order") if tellable else None,
        "order": float(np.median(order)) if family == "order" else float("nan"),
        "hz": float(np.median(hz)) if family == "fixed" else float("nan"),
        "order_min": float(order.min()), "order_max": float(order.max()),
        "hz_min": float(hz.min()), "hz_max": float(hz.max()),
        "rpm_min": float(rpm.min()), "rpm_max": float(rpm.max()),
        "points": int(len(pts)), "amplitude_max": float(amp.max()),
    }


def group_ridges(points, *, order_resolution, tolerance_bins=1.5, min_points=MIN_GROUP_POINTS,
                 min_amplitude=0.0):
    """Join ridge points into order lines and fixed-frequency lines.

    Parameters
    ----------
    points : pandas.DataFrame
        Columns ``rpm`` (rpm), ``order`` and ``amplitude`` (linear, the map's unit), one row per
        ridge point (e.g. :attr:`Identification.unexplained`).
    order_resolution : float
        Bin spacing of the order map, orders (1 / revolutions per block).
    tolerance_bins : float, optional
        Points closer than this many bins (in order, or in Hz at each point's speed) are
        joined (default 1.5).
    min_points : int, optional
        Fewest points that make a line (default 4).
    min_amplitude : float, optional
        A line whose largest amplitude is below this is left out (e.g. the map's maximum
        60 dB down, :data:`UNMATCHED_RANGE_DB`: the range a map's colour scale shows).

    Returns
    -------
    (pandas.DataFrame, int)
        The table, columns :data:`RIDGE_GROUP_COLUMNS`, strongest line first, and the number of
        points left out (in no line).  ``family`` is ``"order"`` (moves with speed),
        ``"fixed"`` (stays at one frequency) or ``"unclear"`` (the group spans less than 10 %
        of speed, so the two cannot be told apart); ``order`` is the median order of an order
        line, ``hz`` the median frequency (Hz) of a fixed line.

    Notes
    -----
    Order lines are looked for first: points are grouped by order (single-link, a gap larger
    than the tolerance starts a new group; a group spreading over more than twice the
    tolerance is a chain of unrelated points, not a line).  The points left are then grouped by frequency,
    with the tolerance of one bin in Hz at each point's speed (``order_resolution * rpm /
    60``).  A group whose points cover fewer than ``min_points`` blocks is not a line.
    """
    cols = list(RIDGE_GROUP_COLUMNS)
    res = float(order_resolution)
    pts = points[["rpm", "order", "amplitude"]].reset_index(drop=True)
    pts = pts[np.isfinite(pts["rpm"]) & np.isfinite(pts["order"]) & (pts["rpm"] > 0)].reset_index(drop=True)
    rows = []
    if len(pts):
        tol = np.full(len(pts), tolerance_bins * res)
        lab = _clusters(pts["order"].to_numpy(), tol)
        taken = np.zeros(len(pts), dtype=bool)
        for g in np.unique(lab):
            sel = lab == g
            o = pts["order"].to_numpy()[sel]
            steady = np.ptp(o) <= 2.0 * tolerance_bins * res  # a chain drifting in order is no order line
            if steady and np.unique(pts["rpm"].to_numpy()[sel]).size >= min_points:
                rows.append(_summarise(pts[sel], "order"))
                taken |= sel
        rest_idx = np.flatnonzero(~taken)
        rest = pts.iloc[rest_idx]
        if len(rest):
            hz = rest["order"].to_numpy() * rest["rpm"].to_numpy() / 60.0
            tol_hz = tolerance_bins * res * rest["rpm"].to_numpy() / 60.0
            lab = _clusters(hz, tol_hz)
            for g in np.unique(lab):
                sel = lab == g
                f = hz[sel]
                steady = np.ptp(f) <= 2.0 * tol_hz[sel].max()
                if steady and np.unique(rest["rpm"].to_numpy()[sel]).size >= min_points:
                    rows.append(_summarise(rest[sel], "fixed"))
                    taken[rest_idx[sel]] = True
        left = int((~taken).sum())
    else:
        left = 0
    weak = [r for r in rows if not r["amplitude_max"] >= min_amplitude]
    left += sum(r["points"] for r in weak)
    rows = [r for r in rows if r["amplitude_max"] >= min_amplitude]
    table = pd.DataFrame(rows, columns=[c for c in cols if c != "id"])
    table = table.sort_values("amplitude_max", ascending=False, kind="stable").reset_index(drop=True)
    table.insert(0, "id", [f"U{i + 1}" for i in range(len(table))])
    return table[cols], left
