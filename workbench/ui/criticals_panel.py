"""Run-up panel: Bode and polar plots of chosen orders, and the critical speeds they show.

Controls: the orders to track, the revolutions per block, a phase offset and the operating
range (for the separation margins); "Track" recomputes (order tracks are cached per setting).
Tabs: the Bode plot, the polar plot of a chosen order, and the criticals table with the peaks
not taken and why.  The safety caution stays under the controls.
"""

from __future__ import annotations

import html

import ipywidgets as widgets

from workbench.errors import FoldlineError
from workbench.textparse import parse_orders
from workbench.plots import plot_bode, plot_polar
from workbench.plots.common import figure_bytes
from workbench.ui._common import STYLE, Cache, collect_warnings, error_html, html_table

__all__ = ["CriticalsPanel"]

_DPI = 80
_COLUMNS = (("order", "order"), ("rpm", "critical (rpm)"), ("amplitude", "peak amplitude"),
            ("amplification_factor", "AF"), ("half_power", "half-power (rpm)"),
            ("phase_change_deg", "phase change (deg)"),
            ("separation_margin_pct", "separation margin (%)"))


class CriticalsPanel:
    """Order tracks with phase, Bode and polar plots, and critical speeds of one run.

    Parameters
    ----------
    run : Run or path
        The recording (its sidecar names the tacho).
    machine : Machine or path, optional
        Default: the run's machine file (not needed for these views).
    orders : sequence of float
        Orders tracked at first (default 1 and 2).
    operating_rpm : (float, float), optional
        Operating range, rpm.
    channel : str or int, optional
        Vibration channel (default the first that is not the tacho).
    speed_options : dict, optional
        Speed options of :func:`workbench.runs.analysis.run_speed` (``rpm``, ``tacho``, ...).
    """

    def __init__(self, run, *, machine=None, orders=(1.0, 2.0), operating_rpm=None,
                 channel=None, speed_options=None):
        from workbench.runs import read_run
        from workbench.runs.criticals import SAFETY_NOTE

        self.run = read_run(run) if not hasattr(run, "iter_chunks") else run
        self.machine = machine
        self.channel = channel
        self.speed_options = dict(speed_options or {})
        self.orders = widgets.Text(value=",".join(f"{o:g}" for o in orders),
                                   description="orders")
        self.revs_per_block = widgets.BoundedFloatText(value=8.0, min=1.0, max=256.0, step=1.0,
                                                       description="revs/block")
        self.offset_deg = widgets.FloatText(value=0.0, description="phase offset")
        self.operating = widgets.Text(
            value="" if operating_rpm is None else f"{operating_rpm[0]:g},{operating_rpm[1]:g}",
            placeholder="LO,HI rpm", description="operating")
        self.track = widgets.Button(description="Track", button_style="primary")
        self.polar_order = widgets.Dropdown(description="polar of")
        self.bode = widgets.Image(format="png")
        self.polar = widgets.Image(format="png")
        self.table = widgets.HTML()
        self.message = widgets.HTML()
        self.tabs = widgets.Tab([self.bode, widgets.VBox([self.polar_order, self.polar]),
                                 self.table])
        for i, title in enumerate(("Bode", "Polar", "Critical speeds")):
            self.tabs.set_title(i, title)
        safety = widgets.HTML(f'<div class="foldline-note"><b>Safety.</b> '
                              f"{html.escape(SAFETY_NOTE)}</div>")
        self.widget = widgets.VBox([
            widgets.HTML(STYLE),
            widgets.HBox([self.orders, self.revs_per_block]),
            widgets.HBox([self.offset_deg, self.operating, self.track]),
            safety, self.message, self.tabs])
        self._cache = Cache(8)
        self.result = None
        self.track.on_click(lambda _b: self.update())
        self.polar_order.observe(lambda _c: self._draw_polar(), names="value")
        self.update()

    # -- compute --------------------------------------------------------------------------
    def _settings(self):
        orders = parse_orders(self.orders.value, "orders")
        text = self.operating.value.strip()
        operating = None
        if text:
            try:
                lo, hi = (float(v) for v in text.split(","))
            except ValueError:
                raise FoldlineError(f"operating {text!r}: give LO,HI in rpm") from None
            operating = (lo, hi)
        return orders, float(self.revs_per_block.value), float(self.offset_deg.value), operating

    def update(self) -> None:
        """Track with the controls' settings and redraw (errors show in the panel)."""
        from workbench.runs.criticals import run_criticals

        try:
            key = self._settings()
            orders, rpb, offset, operating = key
            with collect_warnings() as caught:
                self.result = self._cache.get(key, lambda: run_criticals(
                    self.run, orders=orders, revs_per_block=rpb, offset_deg=offset,
                    operating_rpm=operating, machine=self.machine, channel=self.channel,
                    rf_map=False, **self.speed_options))
        except FoldlineError as exc:
            self.message.value = error_html(exc)
            return
        r = self.result
        notes = [f"phase {r.phase_reference}"
                 + ("" if r.phase_reference == "absolute"
                    else " (no once-per-rev reference: compare phases within this run only)"),
                 f"{len(r.criticals)} critical speed(s)"]
        notes += [str(w) for w in getattr(caught, "messages", [])][:3]
        self.message.value = f'<div class="foldline-note">{html.escape("; ".join(notes))}</div>'
        ch = r.channels[0]
        tracks = r.tracks_of(ch)
        fig = plot_bode(tracks, r.criticals_of(ch), unit=r.units.get(ch, ""),
                        operating_rpm=r.operating_rpm)
        self.bode.value = figure_bytes(fig, dpi=_DPI)
        self.polar_order.options = [(f"order {tr.order:g}", i) for i, tr in enumerate(tracks)]
        self.polar_order.value = 0
        self._draw_polar()
        rows = []
        for c in r.criticals_of(ch):
            row = c.to_dict()
            row["half_power"] = f"{c.half_power_rpm[0]:.0f}-{c.half_power_rpm[1]:.0f}"
            rows.append(row)
        rejected = "".join(f"<li>order {p.order:g} at {p.rpm:.0f} rpm: {html.escape(p.reason)}</li>"
                           for _, p in r.rejected[:10])
        self.table.value = (html_table(rows, _COLUMNS, css_class="foldline-criticals",
                                       formats={"rpm": ".0f", "amplification_factor": ".1f",
                                                "phase_change_deg": ".0f", "amplitude": ".4g",
                                                "separation_margin_pct": ".1f"},
                                       empty="no critical speed found in the tracked orders")
                            + (f'<div class="foldline-note">peaks not taken:<ul>{rejected}</ul>'
                               "</div>" if rejected else ""))

    def _draw_polar(self) -> None:
        if self.result is None or self.polar_order.value is None:
            return
        ch = self.result.channels[0]
        tracks = self.result.tracks_of(ch)
        tr = tracks[min(self.polar_order.value, len(tracks) - 1)]
        fig = plot_polar(tr, self.result.criticals_of(ch), unit=self.result.units.get(ch, ""))
        self.polar.value = figure_bytes(fig, dpi=_DPI)

    # -- display --------------------------------------------------------------------------
    def show(self):
        """Display the panel in the notebook."""
        from IPython.display import display

        display(self.widget)

    def _ipython_display_(self):
        self.show()
