"""Angle-domain figures: tacho check, order spectrum, order map, order cuts, frequency map.

The machine's predicted lines are overlaid where a machine is given: direct lines at their
order, folded lines at their apparent order (which moves with speed), identified aliases
marked.  Inputs are duck-typed results of :mod:`workbench.angle` (objects with ``rpm``,
``order``, ``amplitude`` ... attributes) so figures can also be drawn from saved tables.
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import LogNorm
from matplotlib.lines import Line2D

from workbench.machine.lines import kind_name
from workbench.plots.common import KIND_COLOURS, new_figure, place_labels

__all__ = [
    "plot_tacho_check",
    "plot_order_spectrum",
    "plot_order_map",
    "plot_order_cuts",
    "plot_frequency_map",
    "overlay_predicted_orders",
    "overlay_names",
    "OVERLAYS",
    "plot_order_envelopes",
    "plot_overall_level",
    "shade_invalid_orders",
    "plot_waterfall",
]


def _colour_scale(vmax, dynamic_range_db, db):
    """(vmin, norm): logarithmic colours for amplitudes, linear for levels already in dB."""
    from matplotlib.colors import Normalize

    if db:
        return vmax - dynamic_range_db, Normalize(vmin=vmax - dynamic_range_db, vmax=vmax)
    vmin = vmax * 10 ** (-dynamic_range_db / 20.0)
    return vmin, LogNorm(vmin=vmin, vmax=vmax)


def _db(amplitude, ref=None):
    a = np.asarray(amplitude, dtype=float)
    ref = float(np.nanmax(a)) if ref is None else float(ref)
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.maximum(a, 1e-300) / max(ref, 1e-300))


def plot_tacho_check(time_s, rpm, *, pulse_times_s=None, doubted_times_s=(), doubted_reasons=(), title=None,
                     uncertainty=None, source="tacho"):
    """Speed against time from the tacho, with the pulses and the doubted pulses marked.

    Parameters
    ----------
    time_s, rpm : array_like
        Speed curve (reference shaft), rpm against seconds.
    pulse_times_s : array_like, optional
        Accepted pulse times, s (drawn as ticks along the bottom).
    doubted_times_s, doubted_reasons : sequence, optional
        Pulses the tacho processing doubted, and why.
    uncertainty : float or array_like, optional
        RMS relative uncertainty of the speed (a fraction), one value or one per point of
        ``time_s``; drawn as a band of +-2 x it around the speed (about 95 % for a normal
        error).  NaN or None: no band.
    source : str
        Where the speed came from ("tacho", "vibration", "channel", ...), for the legend.
    """
    fig = new_figure(width_in=10.0, height_in=4.2)
    ax = fig.add_subplot()
    ax.plot(time_s, rpm, color="#0072B2", lw=1.2, label=f"speed from {source}")
    if uncertainty is not None:
        u = np.broadcast_to(np.asarray(uncertainty, dtype=float), np.shape(rpm))
        if np.isfinite(u).any():
            r = np.asarray(rpm, dtype=float)
            ax.fill_between(time_s, r * (1 - 2 * u), r * (1 + 2 * u), color="#56B4E9", alpha=0.35,
                            lw=0, label=f"+-2 x RMS uncertainty (up to {200 * np.nanmax(u):.2g} %)")
    if pulse_times_s is not None and len(pulse_times_s):
        pt = np.asarray(pulse_times_s)
        step = max(1, len(pt) // 2000)
        ax.plot(pt[::step], np.full(len(pt[::step]), np.nanmin(rpm)), "|", color="#999999", ms=6,
                label=f"pulses ({len(pt)})" + (f", every {step}th shown" if step > 1 else ""))
    dt = np.asarray(doubted_times_s, dtype=float)
    if dt.size:
        r_at = np.interp(dt, time_s, rpm)
        ax.plot(dt, r_at, "x", color="#D55E00", ms=8, mew=2, label=f"doubted pulses ({dt.size})")
        for t, r, why in list(zip(dt, r_at, doubted_reasons))[:8]:
            ax.annotate(str(why), (t, r), xytext=(4, 8), textcoords="offset points", fontsize=7, color="#D55E00")
    ax.set_xlabel("time (s)")
    ax.set_ylabel("reference shaft speed (rpm)")
    ax.grid(True, lw=0.3, alpha=0.5)
    ax.legend(fontsize=8, loc="best")
    ax.set_title(title or "Tacho check", fontsize=10)
    return fig


def speed_check_options(angle, t, *, estimate=None, source="tacho") -> dict:
    """Keyword options of :func:`plot_tacho_check` for a shaft angle evaluated at times ``t``.

    The pulses are drawn for a tacho only; the uncertainty is the estimate's per point (speed
    from the vibration or a speed channel) or the tacho timing's RMS figure.
    """
    unc = None
    if estimate is not None:
        unc = np.interp(t, estimate.time_s, estimate.uncertainty)
    elif getattr(angle, "timing", None) is not None:
        unc = float(getattr(angle.timing, "speed_uncertainty", np.nan))
    pulses = getattr(angle, "pulse_times_s", None) if source == "tacho" else None
    return {"pulse_times_s": pulses, "uncertainty": unc, "source": source}


#: Shading of the region a run does not measure faithfully: beyond the anti-alias filter's
#: usable edge (rolled off) and above Nyquist (folded, not measured).
ROLLOFF_SHADE = {"color": "#FFFFFF", "alpha": 0.22, "hatch": "///", "lw": 0.0}
NYQUIST_SHADE = {"color": "#FFFFFF", "alpha": 0.45, "lw": 0.0}


def _valid_handles(valid):
    from matplotlib.patches import Patch

    out = []
    if valid.usable_hz < valid.nyquist_hz:
        out.append(Patch(facecolor="#BBBBBB", hatch="///", edgecolor="#777777",
                         label=f"beyond the filter's usable band ({valid.usable_hz:.0f} Hz): rolled off"))
    out.append(Patch(facecolor="#DDDDDD", edgecolor="#777777",
                     label=f"above Nyquist ({valid.nyquist_hz:g} Hz): folded, not measured"))
    return out


def shade_invalid_orders(ax, valid, rpm_lo, rpm_hi, top):
    """On an order-against-rpm axes: shade where orders lie beyond the usable band / Nyquist."""
    grid = np.linspace(rpm_lo, rpm_hi, 300)
    use = np.minimum(valid.max_order(grid), top)
    nyq = np.minimum(valid.max_order(grid, edge="nyquist"), top)
    if valid.usable_hz < valid.nyquist_hz:
        ax.fill_between(grid, use, nyq, **ROLLOFF_SHADE)
    ax.fill_between(grid, nyq, top, **NYQUIST_SHADE)
    return _valid_handles(valid) if np.any(use < top) else []


def plot_order_spectrum(spectrum, *, peaks=None, lines=None, unit="", max_order=None, title=None, log=True,
                        overlay="all", identification=None, amplitude_label=None, valid=None, rpm_range=None):
    """Averaged order spectrum with its peaks, and the machine's direct line orders on request.

    Parameters
    ----------
    spectrum : object with ``order`` and ``amplitude``
    peaks : pandas.DataFrame, optional
        Columns ``order, amplitude``; labelled where their labels do not overlap, the rest
        marked only.
    lines : sequence of Line, optional
        Order lines are marked at their order (fixed-Hz lines do not have one order).
    overlay : {"none", "matched", "all"}
        Which of ``lines`` are marked (``"matched"``: those ``identification`` lists).
    unit : str
        Amplitude unit (peak, in the channel's unit).
    valid : ValidRegion, optional
        With ``rpm_range`` (the run's lowest and highest speed, rpm): orders beyond the usable
        band at the top speed are shaded light (measured only over part of the run), those
        beyond it at every speed darker.
    """
    overlay = _check_overlay(overlay)
    order = np.asarray(spectrum.order, dtype=float)
    amp = np.asarray(spectrum.amplitude, dtype=float)
    top = float(order[-1]) if max_order is None else float(max_order)
    sel = order <= top
    fig = new_figure(width_in=10.0, height_in=4.8)
    ax = fig.add_subplot()
    ax.plot(order[sel], amp[sel], color="#000000", lw=0.8)
    if log:
        ax.set_yscale("log")
    names = overlay_names(overlay, lines, identification)
    seen = set()
    for ln in (lines or ()):
        if ln.name not in names or ln.order is None or ln.order > top or ln.kind in ("sideband",):
            continue
        ax.axvline(ln.order, color=KIND_COLOURS.get(ln.kind, "#555555"), lw=OVERLAY_LW, alpha=OVERLAY_ALPHA, ls=":")
        seen.add(ln.kind)
    ax.set_xlim(0, top)
    ax.set_xlabel("order (multiples of reference shaft speed)")
    ax.set_ylabel(amplitude_label or f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    vhandles = []
    if valid is not None and rpm_range is not None:
        from matplotlib.patches import Patch

        lo_rpm, hi_rpm = (float(v) for v in rpm_range)
        part = valid.usable_hz * 60.0 / hi_rpm     # beyond the usable band at the top speed
        never = valid.usable_hz * 60.0 / lo_rpm    # beyond it at every speed of the run
        if part < top:
            ax.axvspan(part, min(never, top), color="#999999", alpha=0.15, lw=0)
            vhandles.append(Patch(color="#999999", alpha=0.15, label=f"beyond the usable band ({valid.usable_hz:.0f} Hz) "
                                  f"over part of the run (orders {part:.3g}-{min(never, top):.3g})"))
        if never < top:
            ax.axvspan(never, top, color="#999999", alpha=0.4, lw=0)
            vhandles.append(Patch(color="#999999", alpha=0.4, label=f"beyond it at every speed (orders above {never:.3g})"))
    handles = [Line2D([], [], color=KIND_COLOURS.get(k, "#555555"), ls=":", label=f"predicted {kind_name(k)}")
               for k in sorted(seen)] + vhandles
    if handles:  # below the axes, never over a peak
        ax.legend(handles=handles,
                  fontsize=7, loc="upper left", bbox_to_anchor=(0.0, -0.16), ncol=min(4, len(handles)),
                  frameon=False, borderaxespad=0.0)
    if peaks is not None and len(peaks):
        p = peaks[peaks["order"] <= top]
        ax.plot(p["order"], p["amplitude"], "v", color="#D00000", ms=5)
        head = p.head(10)
        at = place_labels(ax, [[(o, a)] for o, a in zip(head["order"], head["amplitude"])],
                          min_separation_px=26.0)
        unplaced = []
        for row, spot in zip(head.itertuples(index=False), at):
            if spot is not None:
                ax.annotate(f"{row.order:.2f}", (row.order, row.amplitude), xytext=(0, 6), textcoords="offset points",
                            ha="center", fontsize=7, color="#A00000")
            else:
                unplaced.append(f"{row.order:.2f}")
        if unplaced:  # named once, below the axes, rather than printed over each other
            ax.text(0.0, -0.13 if not handles else -0.26, "peaks without room for a label: " + ", ".join(unplaced),
                    transform=ax.transAxes, fontsize=7, color="#A00000", va="top")
    ax.set_title(title or "Order spectrum (averaged over the run)", fontsize=10)
    return fig


#: What a map draws over the measurement: nothing (default), the predicted lines the
#: identification matched to measured ridges, or every predicted line.
from workbench.choices import OVERLAYS  # noqa: E402  (one home for the choice)

#: Overlay lines are thin and translucent so the measured ridges stay readable beneath them.
OVERLAY_LW = 0.6
OVERLAY_ALPHA = 0.45


def _check_overlay(overlay) -> str:
    if overlay not in OVERLAYS:
        from workbench.errors import InputError

        raise InputError(f"overlay {overlay!r} is not valid; allowed: " + ", ".join(OVERLAYS))
    return overlay


def overlay_names(overlay, lines, identification=None):
    """Names of the predicted lines an overlay draws (empty for ``"none"`` or no lines)."""
    _check_overlay(overlay)
    if overlay == "none" or not lines:
        return set()
    if overlay == "all":
        return {ln.name for ln in lines}
    if identification is None or not len(identification.table):
        return set()
    return set(identification.table["line"])


def _overlay_title(base, n_drawn, overlay):
    if not n_drawn:
        return base
    what = "matched to measured ridges" if overlay == "matched" else "all predicted"
    return f"{base}; {n_drawn} predicted line{'s' if n_drawn != 1 else ''} overlaid ({what})"


def overlay_predicted_orders(ax, lines, rate_hz, rpm, *, max_order, identification=None, names=None):
    """Draw each line's direct order (solid) and folded apparent order (dashed) against rpm.

    Lines are thin and translucent (:data:`OVERLAY_LW`, :data:`OVERLAY_ALPHA`).  Only the
    lines named in ``names`` are drawn (or, when None, those an identification table lists,
    or all order lines when none is given).

    Returns
    -------
    (list of Line, dict)
        The lines drawn, and for each identified alias its candidate label points
        ``{name: array (n, 2)}`` along its folded trace (for :func:`place_labels`).
    """
    from workbench.angle.matching import predicted_orders

    rpm = np.asarray(rpm, dtype=float)
    rpm = rpm[rpm > 0]
    if not rpm.size:
        return [], {}
    keep = None
    if names is not None:
        keep = set(names)
    elif identification is not None and len(identification.table):
        keep = set(identification.table["line"])
    chosen = [ln for ln in lines if (keep is None or ln.name in keep)]
    if not chosen:
        return [], {}
    grid = np.linspace(rpm.min(), rpm.max(), 400)
    app, zone, _ = predicted_orders(chosen, rate_hz, grid)
    aliases = set()
    if identification is not None and len(identification.table):
        aliases = set(identification.table.loc[identification.table["alias"], "line"])
    spots = {}
    for i, ln in enumerate(chosen):
        colour = KIND_COLOURS.get(ln.kind, "#FFFFFF")
        y = np.where(app[i] <= max_order, app[i], np.nan)
        direct = zone[i] == 0
        ax.plot(grid, np.where(direct, y, np.nan), color=colour, lw=OVERLAY_LW, alpha=OVERLAY_ALPHA)
        ax.plot(grid, np.where(~direct, y, np.nan), color=colour, lw=OVERLAY_LW, ls=(0, (4, 2)),
                alpha=OVERLAY_ALPHA)
        if ln.name in aliases:
            k = np.flatnonzero(~direct & np.isfinite(y))
            if k.size:  # candidates from the trace's middle outwards
                k = k[np.argsort(np.abs(k - k[len(k) // 2]), kind="stable")]
                spots[ln.name] = np.column_stack([grid[k], y[k]])
    return chosen, spots


def _numbered_labels(ax, spots, *, colour="#A00000", prefix=""):
    """Number the labels at non-overlapping points; return the key entries ``(text, placed)``."""
    names = list(spots)
    placed = place_labels(ax, [spots[n] for n in names])
    key = []
    for i, (name, at) in enumerate(zip(names, placed), start=1):
        tag = f"{prefix}{i}"
        if at is not None:
            ax.annotate(tag, at, ha="center", va="center", fontsize=6.5, color="white",
                        bbox={"boxstyle": "circle,pad=0.15", "fc": colour, "ec": "white", "lw": 0.5,
                              "alpha": 0.9})
        key.append((f"{tag}  {name}" + ("" if at is not None else " (no room on the map)"), at is not None))
    return key


def _key_legend(ax, entries, handles=(), *, title=None):
    """A legend below the axes: line styles first, then the numbered key."""
    from matplotlib.patches import Patch

    items = list(handles) + [Patch(color="none", label=text) for text, _ in entries]
    if not items:
        return
    ax.legend(handles=items, fontsize=6.5, loc="upper left", bbox_to_anchor=(0.0, -0.11),
              ncol=2 if len(items) > 6 else 1, frameon=False, title=title, title_fontsize=7,
              handlelength=1.6 if handles else 0.0, borderaxespad=0.0)


def _unmatched_spots(unmatched, rpm_range, top, *, hz_axis=False, limit=12):
    """Candidate label points of the strongest unmatched lines: ``{"U1 ...": array (n, 2)}``."""
    spots = {}
    if unmatched is None or not len(unmatched):
        return spots
    for r in unmatched.head(limit).itertuples():
        r_lo, r_hi = float(r.rpm_min), float(r.rpm_max)
        grid = np.linspace(r_lo, r_hi, 21)
        mid = np.argsort(np.abs(np.arange(21) - 10), kind="stable")
        if r.family == "order":
            y = np.full(21, float(r.order))
            y = y * grid / 60.0 if hz_axis else y
            what = f"order {float(r.order):.3g}"
        elif r.family == "fixed":
            y = np.full(21, float(r.hz))
            y = y if hz_axis else y / (grid / 60.0)
            what = f"{float(r.hz):.4g} Hz"
        else:
            o = 0.5 * (float(r.order_min) + float(r.order_max))
            y = np.full(21, o) * (grid / 60.0 if hz_axis else 1.0)
            what = f"orders {float(r.order_min):.3g}-{float(r.order_max):.3g}"
        if not hz_axis:
            y = np.where(y <= top, y, np.nan)
        label = f"{r.id}: unmatched, {what}, {r_lo:.0f}-{r_hi:.0f} rpm"
        spots[label] = np.column_stack([grid[mid], y[mid]])
    return spots


def _mark_unmatched(ax, spots):
    """Hollow tags for unmatched measured lines; key entries ``(text, placed)``."""
    placed = place_labels(ax, list(spots.values()), min_separation_px=18.0)
    key = []
    for label, at in zip(spots, placed):
        tag = label.split(":", 1)[0]
        if at is not None:
            ax.annotate(tag, at, ha="center", va="center", fontsize=6, color="black",
                        bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "black", "lw": 0.5,
                              "alpha": 0.85})
        key.append((label + ("" if at is not None else " (no room on the map)"), at is not None))
    return key


def plot_order_map(order_map, *, lines=None, rate_hz=None, identification=None, max_order=None,
                   dynamic_range_db=60.0, unit="", title=None, overlay="none", unmatched=None,
                   amplitude_label=None, valid=None, db=False):
    """Order map (order against rpm, colour = amplitude), measurement first.

    Parameters
    ----------
    order_map : object with ``rpm`` (B,), ``order`` (K,), ``amplitude`` (B, K)
    lines : sequence of Line, optional
        With ``rate_hz`` and an ``overlay``: direct orders drawn solid, folded apparent
        orders dashed, thin and translucent.
    rate_hz : float, optional
        Rate of the recording (needed for the folded prediction).
    identification : Identification, optional
        Chooses the lines of ``overlay="matched"``; its aliases are numbered on the map with
        a key below it.
    overlay : {"none", "matched", "all"}
        Predicted lines drawn over the measurement (default none: the measured ridges alone).
    unmatched : pandas.DataFrame, optional
        Measured lines no prediction explains (``Identification.unmatched``); the strongest
        are tagged ``U1``, ``U2``... on the map and keyed below it.
    dynamic_range_db : float
        Colour scale range below the map's maximum.
    title : str, optional
        The title's start; what is overlaid is appended.
    valid : ValidRegion, optional
        Shades orders beyond the usable band (hatched) and above Nyquist at each speed.
    db : bool
        The amplitudes are levels in dB (linear colour scale ``dynamic_range_db`` deep).
    """
    overlay = _check_overlay(overlay)
    rpm = np.asarray(order_map.rpm, dtype=float)
    order = np.asarray(order_map.order, dtype=float)
    amp = np.asarray(order_map.amplitude, dtype=float)
    top = float(order[-1]) if max_order is None else float(max_order)
    ksel = order <= top
    fig = new_figure(width_in=10.0, height_in=6.5)
    ax = fig.add_subplot()
    vmax = float(np.nanmax(amp[:, ksel])) if amp.size else 1.0
    vmin, norm = _colour_scale(vmax, dynamic_range_db, db)
    order_idx = np.argsort(rpm)
    mesh = ax.pcolormesh(
        rpm[order_idx],
        order[ksel],
        np.clip(amp[order_idx][:, ksel].T, vmin, None),
        shading="nearest",
        norm=norm,
        cmap="viridis",
        rasterized=True,
    )
    cb = fig.colorbar(mesh, ax=ax, pad=0.01)
    cb.set_label(amplitude_label or f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    ax.set_ylim(0, top)
    ax.set_xlim(float(np.nanmin(rpm)), float(np.nanmax(rpm))) if rpm.size else None
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel("order (multiples of reference shaft speed)")
    handles, drawn, spots = [], [], {}
    if valid is not None and rpm.size:
        handles += shade_invalid_orders(ax, valid, float(np.nanmin(rpm)), float(np.nanmax(rpm)), top)
    names = overlay_names(overlay, lines, identification)
    if names and rate_hz is not None:
        drawn, spots = overlay_predicted_orders(ax, lines, rate_hz, rpm, max_order=top,
                                                identification=identification, names=names)
        if drawn:
            handles += [
                Line2D([], [], color="#555555", lw=OVERLAY_LW, label="predicted direct line"),
                Line2D([], [], color="#555555", lw=OVERLAY_LW, ls=(0, (4, 2)),
                       label="predicted folded line (alias); numbered: identified alias"),
            ]
    key = _numbered_labels(ax, spots) if spots else []
    key += _mark_unmatched(ax, _unmatched_spots(unmatched, (rpm.min(), rpm.max()), top)) if rpm.size else []
    _key_legend(ax, key, handles)
    ax.set_title(_overlay_title(title or "Order map", len(drawn), overlay), fontsize=10)
    return fig


def plot_order_cuts(cuts, *, unit="", title=None, log=True, valid=None, amplitude_label=None):
    """Order cuts: amplitude of chosen orders against rpm.

    Parameters
    ----------
    cuts : sequence of objects with ``rpm``, ``amplitude``, ``order`` and ``bandwidth_orders``
    valid : ValidRegion, optional
        Where a cut's band reaches beyond the usable band the curve is drawn dotted and the
        speed is marked; above Nyquist it is greyed (folded: not the order).
    """
    fig = new_figure(width_in=10.0, height_in=4.8)
    ax = fig.add_subplot()
    for cut in cuts:
        rpm = np.asarray(cut.rpm, dtype=float)
        k = np.argsort(rpm)
        bw = getattr(cut, "bandwidth_orders", None)
        label = f"order {cut.order:g}" + (f" (\u00b1{bw / 2:g})" if bw else "")
        amp = np.asarray(cut.amplitude, dtype=float)[k]
        r = rpm[k]
        if valid is None:
            ax.plot(r, amp, lw=1.0, label=label)
            continue
        edge_o = float(cut.order) + 0.5 * (bw or 0.0)
        r_use, r_nyq = valid.edge_rpm(edge_o), valid.edge_rpm(float(cut.order), edge="nyquist")
        ok = r <= r_use
        if r_use < r[-1]:
            label += f"; beyond usable band above {r_use:.0f} rpm"
        if r_nyq < r[-1]:
            label += f", above Nyquist above {r_nyq:.0f} rpm"
        (ln,) = ax.plot(r, np.where(ok, amp, np.nan), lw=1.0, label=label)
        roll = (r >= r_use) & (r <= r_nyq)
        if roll.any():
            ax.plot(r, np.where(roll | (np.arange(r.size) == max(int(np.argmax(roll)) - 1, 0)), amp, np.nan),
                    lw=1.0, ls=":", color=ln.get_color())
            ax.axvline(r_use, color=ln.get_color(), lw=0.6, ls="--", alpha=0.7)
        above = r >= r_nyq
        if above.any():
            ax.plot(r, np.where(above, amp, np.nan), lw=0.8, color="#AAAAAA")
            ax.axvspan(r_nyq, r[-1], color=ln.get_color(), alpha=0.08, lw=0)
    if log:
        ax.set_yscale("log")
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel(amplitude_label or f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    ax.legend(fontsize=7)
    ax.set_title(title or ("Order cuts" + ("" if valid is None else
                                           f" (dotted: beyond the usable band, {valid.usable_hz:.0f} Hz; "
                                           f"grey: above Nyquist, {valid.nyquist_hz:g} Hz)")), fontsize=10)
    return fig


def plot_frequency_map(rf_map, *, lines=None, rate_hz=None, dynamic_range_db=60.0, unit="", title=None,
                           names=None, overlay=None, identification=None, amplitude_label=None, valid=None,
                           db=False):
    """frequency map (Campbell diagram in Hz) from the time-domain signal, measurement first.

    Parameters
    ----------
    rf_map : object with ``rpm`` (B,), ``hz`` (F,), ``amplitude`` (B, F)
    lines : sequence of Line, optional
        With ``rate_hz`` and an overlay, each line's apparent frequency after sampling is
        drawn against rpm (direct solid, folded dashed), thin and translucent.
    overlay : {"none", "matched", "all"}, optional
        Predicted lines drawn (``"matched"``: those ``identification`` lists).  Default:
        ``"matched"`` when ``names`` is given (the lines named), else ``"none"``.
    names : set of str, optional
        Draw only these lines.
    title : str, optional
        The title's start; what is overlaid is appended.
    valid : ValidRegion, optional
        Shades the band beyond the filter's usable edge (up to Nyquist, the map's top).
    """
    from workbench.sampling.folding import fold

    if overlay is None:
        overlay = "matched" if names is not None else "none"
    overlay = _check_overlay(overlay)
    if names is None:
        names = overlay_names(overlay, lines, identification)
    elif overlay == "none":
        names = set()
    rpm = np.asarray(rf_map.rpm, dtype=float)
    hz = np.asarray(rf_map.hz, dtype=float)
    amp = np.asarray(rf_map.amplitude, dtype=float)
    fig = new_figure(width_in=10.0, height_in=5.5)
    ax = fig.add_subplot()
    vmax = float(np.nanmax(amp)) if amp.size else 1.0
    vmin, norm = _colour_scale(vmax, dynamic_range_db, db)
    k = np.argsort(rpm)
    mesh = ax.pcolormesh(rpm[k], hz, np.clip(amp[k].T, vmin, None), shading="nearest",
                         norm=norm, cmap="magma", rasterized=True)
    cb = fig.colorbar(mesh, ax=ax, pad=0.01)
    cb.set_label(amplitude_label or f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    chosen = []
    if lines is not None and rate_hz is not None and rpm.size and names:
        grid = np.linspace(rpm.min(), rpm.max(), 400)
        chosen = [ln for ln in lines if ln.name in names]
        for ln in chosen:
            true = np.asarray(ln.hz_at(grid), dtype=float) * np.ones_like(grid)
            app, zone = fold(true, float(rate_hz))
            colour = KIND_COLOURS.get(ln.kind, "#FFFFFF")
            ax.plot(grid, np.where(zone == 0, app, np.nan), color=colour, lw=OVERLAY_LW, alpha=OVERLAY_ALPHA)
            ax.plot(grid, np.where(zone >= 1, app, np.nan), color=colour, lw=OVERLAY_LW, ls=(0, (4, 2)),
                    alpha=OVERLAY_ALPHA)
    if chosen:
        ax.legend(
            handles=[
                Line2D([], [], color="#DDDDDD", lw=OVERLAY_LW, label="predicted direct line"),
                Line2D([], [], color="#DDDDDD", lw=OVERLAY_LW, ls=(0, (4, 2)), label="predicted folded line"),
            ],
            fontsize=7, loc="upper left", facecolor="#333333", labelcolor="white",
        )
    ax.set_ylim(0, hz[-1] if hz.size else 1.0)
    if valid is not None and valid.usable_hz < (hz[-1] if hz.size else 0.0):
        ax.axhspan(valid.usable_hz, hz[-1], facecolor="white", alpha=0.22, hatch="///", lw=0)
        ax.text(0.99, valid.usable_hz, f" beyond the filter's usable band ({valid.usable_hz:.0f} Hz): rolled off",
                transform=ax.get_yaxis_transform(), ha="right", va="bottom", fontsize=7, color="white")
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel("frequency (Hz)")
    ax.set_title(_overlay_title(title or "Frequency map (Campbell diagram)", len(chosen), overlay),
                 fontsize=10)
    return fig


def plot_order_envelopes(extraction, *, unit="", title=None, log=False):
    """Envelopes of orders extracted by the Vold-Kalman filter: amplitude and phase against rpm.

    Parameters
    ----------
    extraction : object with ``orders``, ``rpm``, ``amplitude`` (n_orders, m), ``phase_deg``
        and ``bandwidth_hz`` (an :class:`~workbench.angle.vold_kalman.OrderExtraction`).
    unit : str
        Amplitude unit (peak, in the channel's unit).
    log : bool
        Logarithmic amplitude axis.
    """
    fig = new_figure(width_in=10.0, height_in=6.0)
    ax, axp = fig.subplots(2, 1, sharex=True, height_ratios=(2, 1))
    rpm = np.asarray(extraction.rpm, dtype=float)
    step = max(1, len(rpm) // 4000)
    for i, order in enumerate(extraction.orders):
        bw = np.asarray(extraction.bandwidth_hz)[i]
        label = (f"order {order:g} (-3 dB bandwidth {bw.min():.3g} Hz)" if np.ptp(bw) == 0 else
                 f"order {order:g} (-3 dB bandwidth {bw.min():.3g}-{bw.max():.3g} Hz)")
        ax.plot(rpm[::step], np.asarray(extraction.amplitude)[i, ::step], lw=1.0, label=label)
        axp.plot(rpm[::step], np.asarray(extraction.phase_deg)[i, ::step], ".", ms=1.5)
    if log:
        ax.set_yscale("log")
    ax.set_ylabel(f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    ax.legend(fontsize=8)
    axp.set_ylabel("phase (deg)")
    axp.set_ylim(-180, 180)
    axp.set_yticks([-180, -90, 0, 90, 180])
    axp.set_xlabel("reference shaft speed (rpm)")
    axp.grid(True, lw=0.3, alpha=0.5)
    ax.set_title(title or "Order envelopes (Vold-Kalman filter)", fontsize=10)
    return fig


def plot_overall_level(overall, *, unit="", title=None, log=False, cuts=None, amplitude_label=None):
    """Overall RMS level against speed, with the order cuts (as RMS) for comparison.

    Parameters
    ----------
    overall : object with ``rpm``, ``rms``, optional ``band_hz`` and ``block_s``
        (an :class:`~workbench.angle.overall.OverallLevel`).
    cuts : sequence of OrderCut, optional
        Drawn thin as RMS (peak / sqrt 2) so one sees which orders make up the overall level.
    unit : str
        The channel's unit.
    """
    fig = new_figure(width_in=10.0, height_in=4.5)
    ax = fig.add_subplot()
    rpm = np.asarray(overall.rpm, dtype=float)
    k = np.argsort(rpm)
    band = getattr(overall, "band_hz", None)
    what = "overall RMS" + (f", {band[0]:g}-{band[1]:g} Hz" if band else ", whole band")
    ax.plot(rpm[k], np.asarray(overall.rms, dtype=float)[k], color="#000000", lw=1.4, label=what)
    for cut in cuts or ():
        r = np.asarray(cut.rpm, dtype=float)
        j = np.argsort(r)
        ax.plot(r[j], np.asarray(cut.amplitude, dtype=float)[j] / np.sqrt(2.0), lw=0.8, alpha=0.8,
                label=f"order {cut.order:g} (RMS)")
    if log:
        ax.set_yscale("log")
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel(amplitude_label or f"RMS{(' (' + unit + ')') if unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    ax.legend(fontsize=8)
    ax.set_title(title or "Overall level against speed (time-domain RMS per block)", fontsize=10)
    return fig


def plot_waterfall(spectra_map, *, unit="", title=None, max_rows=40, dynamic_range_db=60.0, max_axis=None,
                   amplitude_label=None):
    """Waterfall (cascade): the spectra of a map against speed, each row drawn as a line offset upwards.

    Parameters
    ----------
    spectra_map : OrderMap or FrequencyMap
        Rows of spectra (``rpm``, ``order`` or ``hz``, ``amplitude``).
    max_rows : int
        Rows drawn (evenly chosen over the speed range; a map averaged into rpm bins keeps
        its bins).
    dynamic_range_db : float
        Height of one row's scale: levels from the map's maximum to this far below it, dB.
    max_axis : float, optional
        Highest order (or Hz) drawn.
    """
    rpm = np.asarray(spectra_map.rpm, dtype=float)
    axis = np.asarray(spectra_map.order if hasattr(spectra_map, "order") else spectra_map.hz, dtype=float)
    what = "order (multiples of reference shaft speed)" if hasattr(spectra_map, "order") else "frequency (Hz)"
    amp = np.asarray(spectra_map.amplitude, dtype=float)
    top = float(axis[-1]) if max_axis is None else float(max_axis)
    ksel = axis <= top
    k = np.argsort(rpm)
    rows = k[np.unique(np.round(np.linspace(0, len(k) - 1, min(max_rows, len(k)))).astype(int))]
    level = _db(amp[:, ksel], float(np.nanmax(amp[:, ksel])))
    level = np.clip(level, -dynamic_range_db, 0.0) + dynamic_range_db  # 0 .. range
    fig = new_figure(width_in=10.0, height_in=7.0)
    ax = fig.add_subplot()
    span = float(rpm.max() - rpm.min()) if rpm.size > 1 else 1.0
    scale = 3.0 * span / max(len(rows), 1) / dynamic_range_db  # a full-scale line spans 3 rows
    for i in rows[::-1]:  # far (high speed) first, near rows drawn over them
        y = rpm[i] + level[i] * scale
        ax.fill_between(axis[ksel], rpm[i], y, color="white", lw=0, zorder=2 * (len(rpm) - i))
        ax.plot(axis[ksel], y, color="#0072B2", lw=0.6, zorder=2 * (len(rpm) - i) + 1)
    ax.set_xlim(0, top)
    ax.set_xlabel(what)
    ax.set_ylabel(f"reference shaft speed (rpm); each row {dynamic_range_db:g} dB full scale"
                  f" ({amplitude_label or ('peak' + ((' ' + unit) if unit else ''))})")
    ax.set_title(title or "Waterfall: spectra against speed", fontsize=10)
    return fig
