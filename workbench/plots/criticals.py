"""Run-up views: Bode plot, polar plot and Campbell diagram.

* **Bode plot**: each order's amplitude (top) and phase lag (bottom, 0-360 degrees, lag growing
  downward; drawn where the order is above 2 % of its largest amplitude) against speed; each critical marked with its speed and amplification factor, the
  half-power band shaded, the operating range drawn.
* **Polar plot**: the complex order track (amplitude at angle -lag) with the speed written
  along it; criticals marked.
* **Campbell diagram**: the measured frequency map (or an empty frame for a plan), with
  order lines (true frequency against speed), the machine's resonances (horizontal lines, the
  half-power band shaded) and criticals (their natural frequency, rpm / 60 Hz), and every
  crossing of an order line with them marked.
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import LogNorm

from workbench.plots.common import new_figure

__all__ = ["plot_bode", "plot_polar", "plot_campbell", "run_up_figures"]

_ORDER_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")


def _colour(i: int) -> str:
    return _ORDER_COLOURS[i % len(_ORDER_COLOURS)]


def _label(tr, channel=None) -> str:
    text = f"order {tr.order:g}"
    return f"{channel}: {text}" if channel else text


def plot_bode(tracks, criticals=(), *, unit="", operating_rpm=None, title=None, channels=None):
    """Bode plot: amplitude and phase lag of order tracks against speed.

    Parameters
    ----------
    tracks : sequence of OrderTrack
    criticals : sequence of CriticalSpeed
        Marked on the amplitude axis with speed and AF.
    unit : str
        Amplitude unit.
    operating_rpm : (float, float), optional
        Shaded on both axes.
    title : str, optional
    channels : sequence of str, optional
        Channel of each track, for the legend.
    """
    fig = new_figure(width_in=10.0, height_in=6.5)
    ax_a, ax_p = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    relative = False
    for i, tr in enumerate(tracks):
        k = np.argsort(tr.rpm, kind="stable")
        ch = None if channels is None else channels[i]
        ax_a.plot(tr.rpm[k], tr.amplitude[k], color=_colour(i), lw=1.2, label=_label(tr, ch))
        # phase only where the order stands clear of the noise (2 % of its largest amplitude)
        strong = tr.amplitude[k] >= 0.02 * float(np.max(tr.amplitude)) if len(k) else k
        ax_p.plot(tr.rpm[k][strong], tr.phase_deg[k][strong], ".", ms=2.0, color=_colour(i))
        relative |= not tr.absolute_phase
    orders = [tr.order for tr in tracks]
    for c in criticals:
        colour = _colour(orders.index(c.order)) if c.order in orders else "#000000"
        lo, hi = c.half_power_rpm
        for ax in (ax_a, ax_p):
            ax.axvspan(lo, hi, color=colour, alpha=0.10, lw=0)
            ax.axvline(c.rpm, color=colour, lw=0.8, ls="--")
        ax_a.annotate(f"{c.rpm:.0f} rpm\nAF {c.amplification_factor:.1f}",
                      (c.rpm, c.amplitude), xytext=(6, 4), textcoords="offset points",
                      fontsize=8, color=colour,
                      bbox=dict(boxstyle="round,pad=0.2", fc="white", ec=colour, lw=0.6))
        ax_a.plot([c.rpm], [c.amplitude], "o", ms=5, mfc="white", mec=colour)
    if operating_rpm is not None:
        for ax in (ax_a, ax_p):
            ax.axvspan(*operating_rpm, color="#999999", alpha=0.15, lw=0)
        ax_a.text(np.mean(operating_rpm), 0.98, "operating range", transform=ax_a.get_xaxis_transform(),
                  ha="center", va="top", fontsize=8, color="#555555")
    ax_a.set_ylabel(f"amplitude, peak{(' (' + unit + ')') if unit else ''}")
    top = max((float(np.max(tr.amplitude)) for tr in tracks if len(tr.amplitude)), default=1.0)
    ax_a.set_ylim(0, 1.2 * top if top > 0 else 1.0)     # room for the critical's label
    ax_a.grid(True, alpha=0.3)
    ax_a.legend(fontsize=8, loc="upper left")
    ax_p.set_ylim(360, 0)
    ax_p.set_yticks([0, 90, 180, 270, 360])
    ax_p.set_ylabel("phase lag (deg)" + (" - relative" if relative else ""))
    ax_p.set_xlabel("reference shaft speed (rpm)")
    ax_p.grid(True, alpha=0.3)
    ax_a.set_title(title or "Bode plot" + (" (phase relative: no once-per-rev reference)"
                                           if relative else ""), fontsize=10)
    return fig


def plot_polar(track, criticals=(), *, unit="", title=None, n_labels=8):
    """Polar plot of one order track: amplitude at angle ``-lag``, speed written along it.

    Parameters
    ----------
    track : OrderTrack
    criticals : sequence of CriticalSpeed
        Those of the same order are marked.
    unit : str
    n_labels : int
        About how many speed labels along the curve.
    """
    fig = new_figure(width_in=6.8, height_in=6.8)
    ax = fig.add_subplot(projection="polar")
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)           # lag grows clockwise from the reference at the top
    k = np.argsort(track.rpm, kind="stable")
    rpm, amp = track.rpm[k], track.amplitude[k]
    theta = np.deg2rad(track.phase_deg[k])
    # break the line where the lag wraps, so no chord crosses the plot
    unwrapped = np.unwrap(theta)
    ax.plot(unwrapped, amp, color=_colour(0), lw=1.1)
    if len(rpm):
        marks = np.unique(np.linspace(0, len(rpm) - 1, max(2, n_labels)).round().astype(int))
        for i in marks:
            ax.plot([theta[i]], [amp[i]], ".", color="#333333", ms=4)
            ax.annotate(f"{rpm[i]:.0f}", (theta[i], amp[i]), xytext=(4, 4),
                        textcoords="offset points", fontsize=7, color="#333333")
    for c in criticals:
        if c.order != track.order:
            continue
        th = np.deg2rad(c.phase_at_peak_deg)
        ax.plot([th], [c.amplitude], "o", ms=7, mfc="white", mec="#D55E00")
        ax.annotate(f"{c.rpm:.0f} rpm, AF {c.amplification_factor:.1f}", (th, c.amplitude),
                    xytext=(8, -12), textcoords="offset points", fontsize=8, color="#D55E00")
    ax.set_rlabel_position(135)
    ref = "lag from the once-per-rev reference" if track.absolute_phase else "relative lag"
    ax.set_title(title or f"Polar plot: order {track.order:g} ({ref}, speeds in rpm)"
                 + (f"\namplitude in {unit}" if unit else ""), fontsize=10)
    return fig


def _modes(resonances, criticals):
    out = [(m.name, float(m.hz), float(m.zeta), "resonance") for m in resonances]
    out += [(m.name, float(m.rpm) / 60.0, float(m.zeta), "critical") for m in criticals]
    return out


def plot_campbell(rf_map=None, *, orders=(1.0, 2.0), lines=None, resonances=(), criticals=(),
                  rpm_range=None, max_hz=None, dynamic_range_db=60.0, unit="", title=None):
    """Campbell diagram: frequency against speed, order lines, resonances and crossings.

    Parameters
    ----------
    rf_map : FrequencyMap, optional
        The measured map drawn underneath; without it an empty frame (for a plan).
    orders : sequence of float
        Order lines drawn (true frequency ``order x rpm / 60``).
    lines : sequence of Line, optional
        Machine lines also drawn when they cross a resonance inside the speed range.
    resonances, criticals : sequences of Resonance / Critical
        Drawn as horizontal lines at their natural frequency, the half-power band
        ``fn (1 +- zeta)`` shaded.
    rpm_range : (float, float), optional
        Speed range (default the map's).
    max_hz : float, optional
        Top of the frequency axis (default the map's, or 1.3 x the highest mode / line end).
    """
    fig = new_figure(width_in=10.0, height_in=6.0)
    ax = fig.add_subplot()
    if rf_map is not None:
        rpm = np.asarray(rf_map.rpm, dtype=float)
        hz = np.asarray(rf_map.hz, dtype=float)
        amp = np.asarray(rf_map.amplitude, dtype=float)
        lo, hi = (float(rpm.min()), float(rpm.max())) if rpm_range is None else rpm_range
        top = float(hz[-1]) if max_hz is None else float(max_hz)
        modes_hz = [f for _, f, _, _ in _modes(resonances, criticals)]
        if max_hz is None and modes_hz:
            # zoom on the modes and the tracked orders: the crossings are what the view is for
            top = min(top, max(3.0 * max(modes_hz), 1.1 * max(orders, default=1.0) * hi / 60.0))
        keep = hz <= top * 1.02
        hz, amp = hz[keep], amp[:, keep]
        vmax = float(np.nanmax(amp)) if amp.size else 1.0
        vmin = vmax * 10 ** (-dynamic_range_db / 20.0)
        k = np.argsort(rpm)
        mesh = ax.pcolormesh(rpm[k], hz, np.clip(amp[k].T, vmin, None), shading="nearest",
                             norm=LogNorm(vmin=vmin, vmax=vmax), cmap="Greys", rasterized=True)
        cb = fig.colorbar(mesh, ax=ax, pad=0.01)
        cb.set_label(f"measured amplitude, peak{(' (' + unit + ')') if unit else ''}")
    else:
        if rpm_range is None:
            raise ValueError("plot_campbell needs rf_map or rpm_range")
        lo, hi = (float(v) for v in rpm_range)
        modes_hz = [f for _, f, _, _ in _modes(resonances, criticals)]
        top = float(max_hz) if max_hz is not None else 1.3 * max(
            [max(orders, default=1.0) * hi / 60.0] + modes_hz)
    grid = np.linspace(lo, hi, 200)
    modes = _modes(resonances, criticals)
    drawn = [(f"order {o:g}", float(o)) for o in orders]
    if lines is not None:
        have = {o for _, o in drawn}
        for ln in lines:
            if ln.order is None or ln.order in have:
                continue
            if any(lo <= 60.0 * f / ln.order <= hi for _, f, _, _ in modes):
                drawn.append((ln.name, float(ln.order)))
                have.add(ln.order)
    drawn = [(name, o) for name, o in drawn if o * lo / 60.0 <= top]
    n_machine = len(drawn) - len(orders)
    for i, (name, o) in enumerate(drawn):
        f = o * grid / 60.0
        colour = _colour(i) if i < len(orders) else "#7F7F7F"
        ax.plot(grid, f, color=colour, lw=1.4 if i < len(orders) else 0.6,
                ls="-" if i < len(orders) else (0, (3, 2)))
        if i < len(orders) or n_machine <= 6:      # label every line only when few
            j = np.flatnonzero(f <= top)[-1]
            ax.annotate(name, (grid[j], f[j]), xytext=(-4, 3), textcoords="offset points",
                        fontsize=7, color=colour, ha="right")
    n_cross = 0
    for name, fn, zeta, kind in modes:
        colour = "#D55E00" if kind == "resonance" else "#CC79A7"
        ax.axhspan(fn * (1 - zeta), fn * (1 + zeta), color=colour, alpha=0.15, lw=0)
        ax.axhline(fn, color=colour, lw=1.0, ls="-" if kind == "resonance" else "--")
        ax.annotate(f"{name} ({fn:.4g} Hz{', critical' if kind == 'critical' else ''})",
                    (lo, fn), xytext=(3, 3), textcoords="offset points", fontsize=7,
                    color=colour)
        for _, o in drawn:
            r = 60.0 * fn / o
            if lo <= r <= hi and fn <= top:
                ax.plot([r], [fn], "o", ms=6, mfc="none", mec=colour, mew=1.4)
                n_cross += 1
    ax.set_xlim(lo, hi)
    ax.set_ylim(0, top)
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel("frequency (Hz)")
    ax.set_title((title or "Campbell diagram") + f": {n_cross} crossing(s) circled"
                 + (f"; dashed: {n_machine} machine lines that cross a mode" if n_machine > 0
                    else ""), fontsize=10)
    ax.grid(True, alpha=0.25)
    return fig


def run_up_figures(result, *, channel=None) -> dict:
    """Bode, polar and Campbell figures of a run's order tracks and criticals.

    Parameters
    ----------
    result : RunCriticals
        From :func:`workbench.runs.criticals.run_criticals`.
    channel : str, optional
        The channel shown (default the first).

    Returns
    -------
    dict
        ``{"bode.png": Figure, "polar.png": Figure, "campbell.png": Figure}``.
    """
    from pathlib import Path

    ch = result.channels[0] if channel is None else channel
    tracks = result.tracks_of(ch)
    crits = result.criticals_of(ch)
    unit = result.units.get(ch, "")
    name = Path(result.source).name
    m = result.machine
    rel = "" if result.phase_reference == "absolute" else " (phase relative)"
    return {
        "bode.png": plot_bode(tracks, crits, unit=unit, operating_rpm=result.operating_rpm,
                              title=f"Bode plot: {name}, channel {ch}{rel}"),
        "polar.png": plot_polar(tracks[0], crits, unit=unit),
        "campbell.png": plot_campbell(
            result.rf_map, orders=[tr.order for tr in tracks],
            lines=None if m is None else m.lines(),
            resonances=() if m is None else m.resonances,
            criticals=() if m is None else m.criticals,
            rpm_range=(result.shaft_angle.rpm_min, result.shaft_angle.rpm_max), unit=unit,
            title=f"Campbell diagram: {name}, channel {ch}"),
    }
