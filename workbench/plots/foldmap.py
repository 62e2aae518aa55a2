"""Fold map figure: every line's apparent frequency against speed, with bands and collisions.

Drawn for a reader: lines thin and coloured by their source (one key entry per source), bands
translucent *above* the lines with their names, collisions numbered where the numbers do not
overlap (key below the map), overlaps (direct lines inside a band) marked, and a legend that
lists only what is drawn.  ``log_frequency`` spreads the low-frequency region (bearing bands,
shaft orders) that a linear axis squeezes against zero; ``inset_hz`` keeps the linear axis and
adds the region from 0 to that frequency enlarged beside the map (:func:`draw_low_frequency`).
"""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle
from matplotlib.ticker import MaxNLocator

from workbench.plots.common import KIND_COLOURS, new_figure, place_labels, source_colours, text_size_px

__all__ = ["plot_fold_map", "draw_fold_map", "draw_low_frequency", "low_frequency_top"]

_BAND_COLOURS = ("#F0E442", "#CC79A7", "#56B4E9", "#009E73", "#E69F00", "#D55E00")

#: Line widths: thin, so bands and collisions stay readable over a dense family of lines.
_LW_DIRECT, _LW_FOLDED, _LW_FAINT = 0.8, 0.9, 0.5
_OVERLAP_COLOUR = "#E69F00"


def _segments(mask):
    """Split index runs where mask is True, as (start, stop) slices with one point of overlap."""
    padded = np.concatenate(([False], mask, [False]))
    d = np.diff(padded.astype(np.int8))
    starts = np.flatnonzero(d == 1)
    stops = np.flatnonzero(d == -1)
    return [(s, e) for s, e in zip(starts, stops)]


def _interval_mask(rpm, lo, hi):
    sel = (rpm >= lo) & (rpm <= hi)
    if not sel.any():
        k = int(np.argmin(np.abs(rpm - 0.5 * (lo + hi))))
        sel = np.zeros_like(rpm, dtype=bool)
        sel[k] = True
    return sel


def draw_fold_map(ax, fmap, plan, *, collisions=None, view="hz", show_faint=True, lines=None, bands=None,
                  colour_by="source", log_frequency=False, callouts=True, bands_above=True):
    """Draw a fold map on an existing Axes.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    fmap : FoldMap
    plan : Plan
        Gives the bands and the threshold.
    collisions : pandas.DataFrame, optional
        Table from :func:`workbench.sampling.find_collisions`; collisions are drawn thick red
        and numbered (one per band, its strongest), overlaps (direct lines in a band) thick
        orange.
    view : {"hz", "order"}
        Vertical axis: apparent frequency in Hz, or apparent order of the reference shaft.
    show_faint : bool
        Draw folded segments whose residual is below the threshold (faint grey).
    lines : set of str, optional
        Names of lines to draw (default all).
    bands : set of str, optional
        Names of bands to draw (default all).
    colour_by : {"source", "kind"}
        Line colours: one per source entry of the machine (default) or per line kind.
    log_frequency : bool
        Logarithmic vertical axis (spreads the low-frequency region).
    callouts : bool
        Number the collisions on the map (the key lists them).
    bands_above : bool
        Bands translucent above the lines (default); False draws them underneath (the
        notebook panel's picture, which redraws lines over a fixed background).

    Returns
    -------
    matplotlib.axes.Axes
    """
    from workbench.errors import InputError

    if view not in ("hz", "order"):
        raise InputError(f"view = {view!r}: choose 'hz' or 'order'")
    if colour_by not in ("source", "kind"):
        raise InputError(f"colour_by = {colour_by!r}: choose 'source' or 'kind'")
    rpm = fmap.rpm
    shaft_hz = rpm / 60.0
    y_all = fmap.apparent_hz if view == "hz" else fmap.apparent_order
    zone, res = fmap.zone, fmap.residual_db
    thr = plan.threshold_db
    all_lines = fmap.lines
    shown = [ln for ln in all_lines if lines is None or ln.name in lines]
    by_source = source_colours(all_lines) if colour_by == "source" else {}

    def colour_of(line):
        return by_source.get(line.entry) if by_source else KIND_COLOURS.get(line.kind, "#333333")

    drew = {"direct": False, "folded": False, "faint": False}
    for i, line in enumerate(all_lines):
        if lines is not None and line.name not in lines:
            continue
        y = y_all[i]
        colour = colour_of(line)
        direct = zone[i] == 0
        strong = res[i] > thr
        # Line2D + add_line rather than ax.plot: the limits are set explicitly below, and
        # plot()'s argument parsing costs a third of the figure's drawing time.
        for s, e in _segments(direct):
            ax.add_line(Line2D(rpm[s:e], y[s:e], color=colour, lw=_LW_DIRECT, zorder=3))
            drew["direct"] = True
        for s, e in _segments(~direct & strong):
            ax.add_line(Line2D(rpm[s:e], y[s:e], color=colour, lw=_LW_FOLDED, ls=(0, (4, 2)), zorder=3))
            drew["folded"] = True
        if show_faint:
            for s, e in _segments(~direct & ~strong):
                ax.add_line(Line2D(rpm[s:e], y[s:e], color="#BBBBBB", lw=_LW_FAINT, ls=(0, (1, 2)), zorder=2))
                drew["faint"] = True
    # Bands above the lines, translucent, edged, with their names.
    band_handles, band_spots = [], {}
    for j, band in enumerate(plan.bands):
        if bands is not None and band.name not in bands:
            continue
        lo, hi = band.limits_hz(rpm, all_lines)
        lo = np.broadcast_to(np.asarray(lo, dtype=float), rpm.shape)
        hi = np.broadcast_to(np.asarray(hi, dtype=float), rpm.shape)
        if view == "order":
            lo, hi = lo / shaft_hz, hi / shaft_hz
        colour = _BAND_COLOURS[j % len(_BAND_COLOURS)]
        z = 5 if bands_above else 1
        ax.fill_between(rpm, lo, hi, color=colour, alpha=0.3, linewidth=0, zorder=z)
        if bands_above:
            ax.plot(rpm, lo, color=colour, lw=0.7, zorder=z, alpha=0.9)
            ax.plot(rpm, hi, color=colour, lw=0.7, zorder=z, alpha=0.9)
        band_handles.append(Patch(color=colour, alpha=0.45, label=f"band: {band.name}"))
        mid = 0.5 * (lo + hi) if not log_frequency else np.sqrt(np.maximum(lo, 1e-9) * np.maximum(hi, 1e-9))
        order_pref = np.argsort(np.abs(np.arange(rpm.size) - int(0.1 * rpm.size)), kind="stable")[::5]
        band_spots[band.name] = (np.column_stack([rpm[order_pref], mid[order_pref]]), colour)
    marks = {"collision": False, "overlap": False}
    key = []
    spots = {}
    if collisions is not None and len(collisions):
        index = {ln.name: i for i, ln in enumerate(all_lines)}
        kinds = {ln.name: ln.kind for ln in all_lines}
        # Number one collision per band: the strongest, or a line that is not a sideband when
        # one lies within 0.5 dB of it (a mesh harmonic says more than its sidebands).
        chosen = {}
        folded = collisions[collisions["kind"] == "collision"]
        for band, rows in folded.groupby("band", sort=False):
            near = rows[rows["residual_db"] >= rows["residual_db"].max() - 0.5]
            main = [n for n in near["line"] if kinds.get(n) != "sideband"]
            chosen[band] = main[0] if main else near["line"].iloc[0]
        per_band = folded.groupby("band", sort=False).size().to_dict()
        for row in collisions.itertuples(index=False):
            if row.line not in index or (lines is not None and row.line not in lines):
                continue
            i = index[row.line]
            sel = _interval_mask(rpm, row.rpm_min, row.rpm_max)
            if row.kind == "overlap":
                ax.plot(rpm[sel], y_all[i][sel], color=_OVERLAP_COLOUR, lw=3.0, alpha=0.55, zorder=4,
                        solid_capstyle="round", marker="s" if sel.sum() == 1 else None, ms=3)
                marks["overlap"] = True
                continue
            if row.kind != "collision":
                continue
            ax.plot(rpm[sel], y_all[i][sel], color="#D00000", lw=3.5, alpha=0.75, zorder=6,
                    solid_capstyle="round", marker="o" if sel.sum() == 1 else None, ms=4)
            marks["collision"] = True
            if not callouts or chosen.get(row.band) != row.line or row.band in spots:
                continue
            k = np.flatnonzero(sel)
            k = k[np.argsort(np.abs(k - k[len(k) // 2]), kind="stable")]
            others = per_band.get(row.band, 1) - 1
            spots[row.band] = (row, np.column_stack([rpm[k], y_all[i][k]]), others)
    nyq = fmap.nyquist_hz
    edge = plan.filter.usable_edge_hz(fmap.rate_hz) if plan.filter.kind != "none" else None
    y_top = None
    if view == "hz":
        y_top = nyq * 1.02
        ax.axhline(nyq, color="k", lw=1.2, zorder=6)
        if edge is not None and edge < nyq:
            ax.axhline(edge, color="k", lw=0.9, ls="--", zorder=6)
        ax.set_ylabel("apparent frequency after sampling (Hz)")
        nyq_drawn, edge_drawn = True, edge is not None and edge < nyq
    else:
        ax.plot(rpm, nyq / shaft_hz, color="k", lw=1.2, zorder=6)
        if edge is not None and edge < nyq:
            ax.plot(rpm, edge / shaft_hz, color="k", lw=0.9, ls="--", zorder=6)
        top = np.nanmax(np.where(np.isfinite(y_all), y_all, np.nan))
        y_top = min(float(np.nanmax(nyq / shaft_hz)), float(top) * 1.05 + 1.0)
        ax.set_ylabel("apparent order (multiples of reference shaft speed)")
        nyq_drawn = float(np.nanmin(nyq / shaft_hz)) < y_top
        edge_drawn = edge is not None and edge < nyq and float(np.nanmin(edge / shaft_hz)) < y_top
    if log_frequency:
        ys = y_all[np.isfinite(y_all) & (y_all > 0)]
        bottom = max(float(np.nanmin(ys)) * 0.8, y_top * 1e-4) if ys.size else y_top * 1e-3
        ax.set_yscale("log")
        ax.set_ylim(bottom, y_top)
    else:
        ax.set_ylim(0, y_top)
    ax.set_xlim(rpm[0], rpm[-1])
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.grid(True, lw=0.3, alpha=0.5, which="both" if log_frequency else "major")
    # Labels: band names and numbered collisions, never on top of each other.
    if band_spots or spots:
        names = list(band_spots)
        dpi = ax.figure.dpi
        placed = place_labels(ax, [band_spots[n][0] for n in names],
                              sizes=[text_size_px(n, 6.5, dpi) for n in names])
        taken = []
        for name, at in zip(names, placed):
            if at is not None:
                ax.text(at[0], at[1], name, fontsize=6.5, color="black", ha="left", va="center", zorder=8,
                        gid="band-name", bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": band_spots[name][1],
                                               "lw": 0.8, "alpha": 0.8})
                taken.append(at)
        bands_in = list(spots)
        placed = place_labels(ax, [spots[b][1] for b in bands_in], min_separation_px=18.0, occupied=taken)
        for n, (band, at) in enumerate(zip(bands_in, placed), start=1):
            row, _, others = spots[band]
            if at is not None:
                ax.annotate(str(n), at, ha="center", va="center", fontsize=6.5, color="white", zorder=9,
                            gid=f"line:{row.line}",
                            bbox={"boxstyle": "circle,pad=0.15", "fc": "#A00000", "ec": "white", "lw": 0.5})
            key.append(Patch(color="none", label=(
                f"{n}  {row.line} in {band}: {row.residual_db:.0f} dB, {row.rpm_min:.0f}-{row.rpm_max:.0f} rpm"
                + (f" (+{others} more in this band)" if others else "")
                + ("" if at is not None else " (no room on the map)"))))
    style_handles = []
    if by_source:
        used = list(dict.fromkeys(ln.entry for ln in shown))
        style_handles += [Line2D([], [], color=by_source[e], lw=1.6, label=f"source: {e}") for e in used]
    if drew["direct"]:
        style_handles.append(Line2D([], [], color="#555555", lw=_LW_DIRECT, label="direct line (zone 0)"))
    if drew["folded"]:
        style_handles.append(Line2D([], [], color="#555555", lw=_LW_FOLDED, ls=(0, (4, 2)),
                                    label=f"folded line, residual > {thr:g} dB"))
    if drew["faint"]:
        style_handles.append(Line2D([], [], color="#BBBBBB", lw=0.8, ls=(0, (1, 2)),
                                    label="folded line, below threshold"))
    if marks["collision"]:
        style_handles.append(Line2D([], [], color="#D00000", lw=3.5, alpha=0.75,
                                    label="collision (folded line in a band)"))
    if marks["overlap"]:
        style_handles.append(Line2D([], [], color=_OVERLAP_COLOUR, lw=3.0, alpha=0.55,
                                    label="overlap (direct line in a band)"))
    if nyq_drawn:
        style_handles.append(Line2D([], [], color="k", lw=1.2, label=f"Nyquist ({nyq:g} Hz)"))
    if edge_drawn:
        style_handles.append(Line2D([], [], color="k", lw=0.9, ls="--", label=f"filter usable edge ({edge:.0f} Hz)"))
    # One legend below the map (only what is drawn): sources, styles, bands, then the
    # numbered collisions.
    ax.legend(handles=style_handles + band_handles + key, fontsize=6.5, loc="upper left",
              bbox_to_anchor=(0.0, -0.1), framealpha=0.9, borderaxespad=0.0, ncol=3)
    return ax


def low_frequency_top(fmap, top_hz: float, view: str = "hz") -> float:
    """Top of the enlarged low-frequency region on the vertical axis of ``view``.

    ``top_hz`` itself in the Hz view; in the order view the order that is ``top_hz`` at the
    lowest speed of the map (every order below ``top_hz`` somewhere in the speed range).

    Raises
    ------
    InputError
        ``top_hz`` not above 0 or not below Nyquist.
    """
    from workbench.errors import InputError

    top_hz = float(top_hz)
    if not (0.0 < top_hz < fmap.nyquist_hz):
        raise InputError(f"low-frequency inset up to {top_hz:g} Hz: give a frequency above 0 and below "
                         f"Nyquist ({fmap.nyquist_hz:g} Hz at {fmap.rate_hz:g} S/s)")
    if view == "hz":
        return top_hz
    return top_hz * 60.0 / float(np.nanmin(fmap.rpm))


def draw_low_frequency(ax, fmap, plan, top_hz, *, collisions=None, view="hz", **kwargs):
    """Draw the region from 0 to ``top_hz`` of a fold map, enlarged, on an existing Axes.

    The bearing bands and the low lines (shaft orders, cage and ball-spin lines) that the full
    map squeezes against zero: the same lines, bands and collisions as :func:`draw_fold_map`
    (linear axis), without its legend and labels (the full map keys them).

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    fmap, plan, collisions, view
        As for :func:`draw_fold_map`.
    top_hz : float
        Top of the region, Hz (see :func:`low_frequency_top` for the order view).
    **kwargs
        Passed to :func:`draw_fold_map` (``lines``, ``bands``, ``colour_by``, ``show_faint``,
        ``bands_above``); ``log_frequency`` and ``callouts`` do not apply.

    Returns
    -------
    matplotlib.axes.Axes
    """
    top = low_frequency_top(fmap, top_hz, view)
    kwargs = {k: v for k, v in kwargs.items() if k not in ("log_frequency", "callouts")}
    draw_fold_map(ax, fmap, plan, collisions=collisions, view=view, callouts=False, **kwargs)
    legend = ax.get_legend()
    if legend is not None:
        legend.remove()
    for text in list(ax.texts):  # placed for the full range; the full map names the bands
        text.remove()
    ax.set_ylim(0.0, top)
    ax.set_title(f"0 to {top_hz:g} Hz enlarged" if view == "hz" else
                 f"orders 0 to {top:.3g} enlarged ({top_hz:g} Hz at {float(np.nanmin(fmap.rpm)):.0f} rpm)",
                 fontsize=8)
    ax.tick_params(labelsize=7)
    ax.xaxis.set_major_locator(MaxNLocator(5))
    ax.set_ylabel(ax.get_ylabel(), fontsize=7)
    ax.set_xlabel(ax.get_xlabel(), fontsize=7)
    return ax


def plot_fold_map(fmap, plan, *, collisions=None, view="hz", title=None, inset_hz=None, **kwargs):
    """Fold map figure of one rate.

    Parameters
    ----------
    fmap : FoldMap
    plan : Plan
    collisions : pandas.DataFrame, optional
    view : {"hz", "order"}
    title : str, optional
    inset_hz : float, optional
        Add the region from 0 to ``inset_hz`` enlarged beside the map (bearing bands and low
        lines, :func:`draw_low_frequency`), outlined dotted on the map.  ``fig.axes[0]`` stays
        the full map; the enlarged region is ``fig.axes[1]``.
    **kwargs
        Passed to :func:`draw_fold_map` (``colour_by``, ``log_frequency``, ``lines``, ...).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(width_in=11.0 if inset_hz is None else 14.0, height_in=8.0)
    if inset_hz is None:
        ax = fig.add_subplot()
    else:
        low_frequency_top(fmap, inset_hz, view)  # refuse a bad region before drawing
        grid = fig.add_gridspec(1, 2, width_ratios=(2.4, 1.0))
        ax = fig.add_subplot(grid[0, 0])
        inset = fig.add_subplot(grid[0, 1])
    draw_fold_map(ax, fmap, plan, collisions=collisions, view=view, **kwargs)
    if inset_hz is not None:
        draw_low_frequency(inset, fmap, plan, inset_hz, collisions=collisions, view=view, **kwargs)
        top = low_frequency_top(fmap, inset_hz, view)
        x0, x1 = ax.get_xlim()
        ax.add_patch(Rectangle((x0, 0.0), x1 - x0, top, fill=False, ec="#333333", lw=0.9, ls=":", zorder=7,
                               gid="low-frequency-region"))
    n_coll = 0 if collisions is None else int((collisions["kind"] == "collision").sum())
    ax.set_title(
        title
        or f"Fold map at {fmap.rate_hz:g} S/s, {fmap.filter_label}: {n_coll} collision(s)",
        fontsize=10,
    )
    return fig
