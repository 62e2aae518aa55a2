"""Fold map figure: every line's apparent frequency against speed, with bands and collisions."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from workbench.plots.common import KIND_COLOURS, new_figure

__all__ = ["plot_fold_map", "draw_fold_map"]

_BAND_COLOURS = ("#F0E442", "#CC79A7", "#56B4E9", "#009E73", "#E69F00", "#D55E00")


def _segments(mask):
    """Split index runs where mask is True, as (start, stop) slices with one point of overlap."""
    padded = np.concatenate(([False], mask, [False]))
    d = np.diff(padded.astype(np.int8))
    starts = np.flatnonzero(d == 1)
    stops = np.flatnonzero(d == -1)
    return [(s, e) for s, e in zip(starts, stops)]


def draw_fold_map(ax, fmap, plan, *, collisions=None, view="hz", show_faint=True, lines=None, bands=None):
    """Draw a fold map on an existing Axes.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    fmap : FoldMap
    plan : Plan
        Gives the bands and the threshold.
    collisions : pandas.DataFrame, optional
        Table from :func:`workbench.sampling.find_collisions`; collisions are drawn thick red.
    view : {"hz", "order"}
        Vertical axis: apparent frequency in Hz, or apparent order of the reference shaft.
    show_faint : bool
        Draw folded segments whose residual is below the threshold (faint grey).
    lines : set of str, optional
        Names of lines to draw (default all).
    bands : set of str, optional
        Names of bands to draw (default all).
    """
    if view not in ("hz", "order"):
        from workbench.errors import InputError

        raise InputError(f"view = {view!r}: choose 'hz' or 'order'")
    rpm = fmap.rpm
    shaft_hz = rpm / 60.0
    y_all = fmap.apparent_hz if view == "hz" else fmap.apparent_order
    zone, res = fmap.zone, fmap.residual_db
    thr = plan.threshold_db
    all_lines = fmap.lines
    # Bands first, underneath.
    band_handles = []
    for j, band in enumerate(plan.bands):
        if bands is not None and band.name not in bands:
            continue
        lo, hi = band.limits_hz(rpm, all_lines)
        lo = np.broadcast_to(np.asarray(lo, dtype=float), rpm.shape)
        hi = np.broadcast_to(np.asarray(hi, dtype=float), rpm.shape)
        if view == "order":
            lo, hi = lo / shaft_hz, hi / shaft_hz
        colour = _BAND_COLOURS[j % len(_BAND_COLOURS)]
        ax.fill_between(rpm, lo, hi, color=colour, alpha=0.28, linewidth=0, zorder=1)
        band_handles.append(Patch(color=colour, alpha=0.4, label=f"band: {band.name}"))
    for i, line in enumerate(all_lines):
        if lines is not None and line.name not in lines:
            continue
        y = y_all[i]
        colour = KIND_COLOURS.get(line.kind, "#333333")
        direct = zone[i] == 0
        strong = res[i] > thr
        # Line2D + add_line rather than ax.plot: the limits are set explicitly below, and
        # plot()'s argument parsing costs a third of the figure's drawing time.
        for s, e in _segments(direct):
            ax.add_line(Line2D(rpm[s:e], y[s:e], color=colour, lw=1.1, zorder=3))
        for s, e in _segments(~direct & strong):
            ax.add_line(Line2D(rpm[s:e], y[s:e], color=colour, lw=1.3, ls=(0, (4, 2)), zorder=4))
        if show_faint:
            for s, e in _segments(~direct & ~strong):
                ax.add_line(Line2D(rpm[s:e], y[s:e], color="#BBBBBB", lw=0.6, ls=(0, (1, 2)), zorder=2))
    if collisions is not None and len(collisions):
        index = {ln.name: i for i, ln in enumerate(all_lines)}
        kinds = {ln.name: ln.kind for ln in all_lines}
        labelled = set()
        # Label one collision per band: the strongest, or a line that is not a sideband when
        # one lies within 0.5 dB of it (a mesh harmonic says more than its sidebands).
        chosen = {}
        folded = collisions[collisions["kind"] == "collision"]
        for band, rows in folded.groupby("band", sort=False):
            near = rows[rows["residual_db"] >= rows["residual_db"].max() - 0.5]
            main = [n for n in near["line"] if kinds.get(n) != "sideband"]
            chosen[band] = main[0] if main else near["line"].iloc[0]
        for row in collisions.itertuples(index=False):
            if row.kind != "collision" or row.line not in index:
                continue
            i = index[row.line]
            sel = (rpm >= row.rpm_min) & (rpm <= row.rpm_max)
            if not sel.any():
                k = int(np.argmin(np.abs(rpm - 0.5 * (row.rpm_min + row.rpm_max))))
                sel = np.zeros_like(rpm, dtype=bool)
                sel[k] = True
            ax.plot(rpm[sel], y_all[i][sel], color="#D00000", lw=4.0, alpha=0.75, zorder=5,
                    solid_capstyle="round", marker="o" if sel.sum() == 1 else None, ms=4)
            if row.band in labelled or chosen.get(row.band) != row.line:
                continue
            labelled.add(row.band)
            stagger = 34 * (len(labelled) - 1)
            k = np.flatnonzero(sel)[len(np.flatnonzero(sel)) // 2]
            ax.annotate(
                f"{row.line} in {row.band}\n{row.residual_db:.0f} dB",
                (rpm[k], y_all[i][k]),
                xytext=(-12, 14 + stagger),
                textcoords="offset points",
                ha="right",
                fontsize=7,
                color="#A00000",
                zorder=7,
                bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": "#A00000", "alpha": 0.85},
                arrowprops={"arrowstyle": "-", "color": "#A00000", "lw": 0.6},
            )
    nyq = fmap.nyquist_hz
    edge = plan.filter.usable_edge_hz(fmap.rate_hz) if plan.filter.kind != "none" else None
    if view == "hz":
        ax.axhline(nyq, color="k", lw=1.2, zorder=6)
        if edge is not None and edge < nyq:
            ax.axhline(edge, color="k", lw=0.9, ls="--", zorder=6)
        ax.set_ylim(0, nyq * 1.02)
        ax.set_ylabel("apparent frequency after sampling (Hz)")
    else:
        ax.plot(rpm, nyq / shaft_hz, color="k", lw=1.2, zorder=6)
        if edge is not None and edge < nyq:
            ax.plot(rpm, edge / shaft_hz, color="k", lw=0.9, ls="--", zorder=6)
        top = np.nanmax(np.where(np.isfinite(y_all), y_all, np.nan))
        ax.set_ylim(0, min(float(np.nanmax(nyq / shaft_hz)), float(top) * 1.05 + 1.0))
        ax.set_ylabel("apparent order (multiples of reference shaft speed)")
    ax.set_xlim(rpm[0], rpm[-1])
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.grid(True, lw=0.3, alpha=0.5)
    style_handles = [
        Line2D([], [], color="#555555", lw=1.1, label="direct line (zone 0)"),
        Line2D([], [], color="#555555", lw=1.3, ls=(0, (4, 2)), label=f"folded line, residual > {thr:g} dB"),
        Line2D([], [], color="#BBBBBB", lw=0.8, ls=(0, (1, 2)), label="folded line, below threshold"),
        Line2D([], [], color="#D00000", lw=4.0, alpha=0.75, label="collision"),
        Line2D([], [], color="k", lw=1.2, label=f"Nyquist ({nyq:g} Hz)"),
    ]
    if edge is not None and edge < nyq:
        style_handles.append(Line2D([], [], color="k", lw=0.9, ls="--", label=f"filter usable edge ({edge:.0f} Hz)"))
    ax.legend(handles=style_handles + band_handles, fontsize=7, loc="upper left",
              bbox_to_anchor=(1.01, 1.0), framealpha=0.9, borderaxespad=0.0)
    return ax


def plot_fold_map(fmap, plan, *, collisions=None, view="hz", title=None, **kwargs):
    """Fold map figure of one rate.

    Parameters
    ----------
    fmap : FoldMap
    plan : Plan
    collisions : pandas.DataFrame, optional
    view : {"hz", "order"}
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(width_in=11.0, height_in=5.5)
    ax = fig.add_subplot()
    draw_fold_map(ax, fmap, plan, collisions=collisions, view=view, **kwargs)
    n_coll = 0 if collisions is None else int((collisions["kind"] == "collision").sum())
    ax.set_title(
        title
        or f"Fold map at {fmap.rate_hz:g} S/s, {fmap.filter_label}: {n_coll} collision(s)",
        fontsize=10,
    )
    return fig
