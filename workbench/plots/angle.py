"""Angle-domain figures: tacho check, order spectrum, order map, order cuts, rpm-frequency map.

The machine's predicted lines are overlaid where a machine is given: direct lines at their
order, folded lines at their apparent order (which moves with speed), identified aliases
marked.  Inputs are duck-typed results of :mod:`workbench.angle` (objects with ``rpm``,
``order``, ``amplitude`` ... attributes) so figures can also be drawn from saved tables.
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import LogNorm
from matplotlib.lines import Line2D

from workbench.plots.common import KIND_COLOURS, new_figure

__all__ = [
    "plot_tacho_check",
    "plot_order_spectrum",
    "plot_order_map",
    "plot_order_cuts",
    "plot_rpm_frequency_map",
    "overlay_predicted_orders",
    "plot_order_envelopes",
]


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


def plot_order_spectrum(spectrum, *, peaks=None, lines=None, unit="", max_order=None, title=None, log=True):
    """Averaged order spectrum with its peaks and the machine's direct line orders.

    Parameters
    ----------
    spectrum : object with ``order`` and ``amplitude``
    peaks : pandas.DataFrame, optional
        Columns ``order, amplitude``.
    lines : sequence of Line, optional
        Order lines are marked at their order (fixed-Hz lines do not have one order).
    unit : str
        Amplitude unit (peak, in the channel's unit).
    """
    order = np.asarray(spectrum.order, dtype=float)
    amp = np.asarray(spectrum.amplitude, dtype=float)
    top = float(order[-1]) if max_order is None else float(max_order)
    sel = order <= top
    fig = new_figure(width_in=10.0, height_in=4.5)
    ax = fig.add_subplot()
    ax.plot(order[sel], amp[sel], color="#000000", lw=0.8)
    if log:
        ax.set_yscale("log")
    if lines is not None:
        seen = set()
        for ln in lines:
            if ln.order is None or ln.order > top or ln.kind in ("sideband",):
                continue
            colour = KIND_COLOURS.get(ln.kind, "#555555")
            ax.axvline(ln.order, color=colour, lw=0.6, alpha=0.6, ls=":")
            if ln.kind not in seen:
                seen.add(ln.kind)
        ax.legend(
            handles=[Line2D([], [], color=KIND_COLOURS.get(k, "#555555"), ls=":", label=f"predicted {k}") for k in sorted(seen)],
            fontsize=7,
            loc="upper right",
            ncol=2,
        )
    if peaks is not None and len(peaks):
        p = peaks[peaks["order"] <= top]
        ax.plot(p["order"], p["amplitude"], "v", color="#D00000", ms=5)
        for row in p.head(8).itertuples(index=False):
            ax.annotate(f"{row.order:.2f}", (row.order, row.amplitude), xytext=(0, 6), textcoords="offset points",
                        ha="center", fontsize=7, color="#A00000")
    ax.set_xlim(0, top)
    ax.set_xlabel("order (multiples of reference shaft speed)")
    ax.set_ylabel(f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    ax.set_title(title or "Order spectrum (averaged over the run)", fontsize=10)
    return fig


def overlay_predicted_orders(ax, lines, rate_hz, rpm, *, max_order, identification=None, names=None):
    """Draw each line's direct order (solid) and folded apparent order (dashed) against rpm.

    Only lines that an identification table lists (or all order lines when none is given and
    ``names`` is None) are drawn, to keep the map readable.
    """
    from workbench.angle.matching import predicted_orders

    rpm = np.asarray(rpm, dtype=float)
    rpm = rpm[rpm > 0]
    if not rpm.size:
        return
    keep = None
    if names is not None:
        keep = set(names)
    elif identification is not None and len(identification.table):
        keep = set(identification.table["line"])
    chosen = [ln for ln in lines if (keep is None or ln.name in keep)]
    if not chosen:
        return
    grid = np.linspace(rpm.min(), rpm.max(), 400)
    app, zone, _ = predicted_orders(chosen, rate_hz, grid)
    aliases = set()
    if identification is not None and len(identification.table):
        aliases = set(identification.table.loc[identification.table["alias"], "line"])
    for i, ln in enumerate(chosen):
        colour = KIND_COLOURS.get(ln.kind, "#FFFFFF")
        y = np.where(app[i] <= max_order, app[i], np.nan)
        direct = zone[i] == 0
        ax.plot(grid, np.where(direct, y, np.nan), color=colour, lw=0.9, alpha=0.9)
        ax.plot(grid, np.where(~direct, y, np.nan), color=colour, lw=1.1, ls=(0, (4, 2)), alpha=0.95)
        if ln.name in aliases:
            k = int(np.nanargmax(np.where(~direct & np.isfinite(y), grid, np.nan))) if np.any(~direct & np.isfinite(y)) else None
            if k is not None:
                ax.annotate(f"alias: {ln.name}", (grid[k], y[k]), xytext=(-6, 6), textcoords="offset points",
                            ha="right", fontsize=7, color="white",
                            bbox={"boxstyle": "round,pad=0.2", "fc": "#A00000", "alpha": 0.8})


def plot_order_map(order_map, *, lines=None, rate_hz=None, identification=None, max_order=None,
                   dynamic_range_db=60.0, unit="", title=None):
    """Order map (order against rpm, colour = amplitude) with predicted lines overlaid.

    Parameters
    ----------
    order_map : object with ``rpm`` (B,), ``order`` (K,), ``amplitude`` (B, K)
    lines : sequence of Line, optional
        With ``rate_hz``: direct orders drawn solid, folded apparent orders dashed.
    rate_hz : float, optional
        Rate of the recording (needed for the folded prediction).
    identification : Identification, optional
        Limits the overlay to the identified lines and labels the aliases.
    dynamic_range_db : float
        Colour scale range below the map's maximum.
    """
    rpm = np.asarray(order_map.rpm, dtype=float)
    order = np.asarray(order_map.order, dtype=float)
    amp = np.asarray(order_map.amplitude, dtype=float)
    top = float(order[-1]) if max_order is None else float(max_order)
    ksel = order <= top
    fig = new_figure(width_in=10.0, height_in=5.5)
    ax = fig.add_subplot()
    vmax = float(np.nanmax(amp[:, ksel])) if amp.size else 1.0
    vmin = vmax * 10 ** (-dynamic_range_db / 20.0)
    order_idx = np.argsort(rpm)
    mesh = ax.pcolormesh(
        rpm[order_idx],
        order[ksel],
        np.clip(amp[order_idx][:, ksel].T, vmin, None),
        shading="nearest",
        norm=LogNorm(vmin=vmin, vmax=vmax),
        cmap="viridis",
        rasterized=True,
    )
    cb = fig.colorbar(mesh, ax=ax, pad=0.01)
    cb.set_label(f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    handles = []
    if lines is not None and rate_hz is not None:
        overlay_predicted_orders(ax, lines, rate_hz, rpm, max_order=top, identification=identification)
        handles = [
            Line2D([], [], color="#DDDDDD", lw=0.9, label="predicted direct line"),
            Line2D([], [], color="#DDDDDD", lw=1.1, ls=(0, (4, 2)), label="predicted folded line (alias)"),
        ]
    ax.set_ylim(0, top)
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel("order (multiples of reference shaft speed)")
    if handles:
        ax.legend(handles=handles, fontsize=7, loc="upper left", facecolor="#333333", labelcolor="white")
    ax.set_title(title or "Order map", fontsize=10)
    return fig


def plot_order_cuts(cuts, *, unit="", title=None, log=True):
    """Order cuts: amplitude of chosen orders against rpm.

    Parameters
    ----------
    cuts : sequence of objects with ``rpm``, ``amplitude``, ``order`` and ``bandwidth_orders``
    """
    fig = new_figure(width_in=10.0, height_in=4.5)
    ax = fig.add_subplot()
    for cut in cuts:
        rpm = np.asarray(cut.rpm, dtype=float)
        k = np.argsort(rpm)
        bw = getattr(cut, "bandwidth_orders", None)
        label = f"order {cut.order:g}" + (f" (\u00b1{bw / 2:g})" if bw else "")
        ax.plot(rpm[k], np.asarray(cut.amplitude)[k], lw=1.0, label=label)
    if log:
        ax.set_yscale("log")
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel(f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    ax.legend(fontsize=8)
    ax.set_title(title or "Order cuts", fontsize=10)
    return fig


def plot_rpm_frequency_map(rf_map, *, lines=None, rate_hz=None, dynamic_range_db=60.0, unit="", title=None,
                           names=None):
    """rpm-frequency map (Campbell diagram in Hz) from the time-domain signal.

    Parameters
    ----------
    rf_map : object with ``rpm`` (B,), ``hz`` (F,), ``amplitude`` (B, F)
    lines : sequence of Line, optional
        With ``rate_hz``, each line's apparent frequency after sampling is drawn against rpm
        (direct solid, folded dashed).
    names : set of str, optional
        Draw only these lines.
    """
    from workbench.sampling.folding import fold

    rpm = np.asarray(rf_map.rpm, dtype=float)
    hz = np.asarray(rf_map.hz, dtype=float)
    amp = np.asarray(rf_map.amplitude, dtype=float)
    fig = new_figure(width_in=10.0, height_in=5.5)
    ax = fig.add_subplot()
    vmax = float(np.nanmax(amp)) if amp.size else 1.0
    vmin = vmax * 10 ** (-dynamic_range_db / 20.0)
    k = np.argsort(rpm)
    mesh = ax.pcolormesh(rpm[k], hz, np.clip(amp[k].T, vmin, None), shading="nearest",
                         norm=LogNorm(vmin=vmin, vmax=vmax), cmap="magma", rasterized=True)
    cb = fig.colorbar(mesh, ax=ax, pad=0.01)
    cb.set_label(f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    if lines is not None and rate_hz is not None and rpm.size:
        grid = np.linspace(rpm.min(), rpm.max(), 400)
        chosen = [ln for ln in lines if names is None or ln.name in names]
        for ln in chosen:
            true = np.asarray(ln.hz_at(grid), dtype=float) * np.ones_like(grid)
            app, zone = fold(true, float(rate_hz))
            colour = KIND_COLOURS.get(ln.kind, "#FFFFFF")
            ax.plot(grid, np.where(zone == 0, app, np.nan), color=colour, lw=0.7, alpha=0.8)
            ax.plot(grid, np.where(zone >= 1, app, np.nan), color=colour, lw=0.9, ls=(0, (4, 2)), alpha=0.9)
        ax.legend(
            handles=[
                Line2D([], [], color="#DDDDDD", lw=0.7, label="predicted direct line"),
                Line2D([], [], color="#DDDDDD", lw=0.9, ls=(0, (4, 2)), label="predicted folded line"),
            ],
            fontsize=7, loc="upper left", facecolor="#333333", labelcolor="white",
        )
    ax.set_ylim(0, hz[-1] if hz.size else 1.0)
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel("frequency (Hz)")
    ax.set_title(title or "rpm-frequency map (Campbell diagram)", fontsize=10)
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
