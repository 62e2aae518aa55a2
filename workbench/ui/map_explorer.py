"""Order map explorer: zoom, a cursor read-out, and harmonic and sideband markers of a chosen line.

Two views of the same results:

- **interactive** (when ipympl, matplotlib's notebook widget backend, is installed): the order
  map, and with them the frequency map, the order cuts and the averaged spectrum, as live
  figures: zoom to a rectangle and pan with the toolbar, a read-out of the data under the mouse
  (order, Hz, rpm and level of the nearest map cell), the limits shown read back in a label,
  and a left click on a figure marks the order under the mouse (see
  :mod:`workbench.ui.interactive`);
- **sliders** (ipywidgets alone, the fallback without ipympl, with a one-line note): range
  sliders zoom the speed and order axes and two sliders place a cursor; the picture is a PNG.

In both, a chosen order (typed, picked from the machine's lines or clicked) gets markers at its
harmonics and at its sidebands (a spacing in orders, e.g. a shaft's order for gear-mesh
sidebands).

    explorer = MapExplorer.from_analysis(analysis)      # or MapExplorer(analysis.order_map, unit=...)
    explorer            # shows itself in a notebook
"""

from __future__ import annotations

import ipywidgets as widgets
import numpy as np

from workbench.errors import InputError
from workbench.plots import plot_order_map
from workbench.plots.common import figure_bytes
from workbench.ui import interactive as live
from workbench.ui._common import STYLE

__all__ = ["MapExplorer"]


class MapExplorer:
    """An order map with zoom, cursor read-out and harmonic / sideband markers.

    Parameters
    ----------
    order_map : OrderMap
        ``rpm`` (B,), ``order`` (K,), ``amplitude`` (B, K).
    unit : str
        Amplitude unit (shown in the read-out).
    valid : ValidRegion, optional
        Shaded on the figures (see :func:`~workbench.plots.angle.plot_order_map`).
    frequency_map, cuts, spectrum : optional
        More figures of the interactive view: the frequency map (``FrequencyMap``), order
        cuts (``OrderCut`` sequence) and the averaged order spectrum (``OrderSpectrum``, its
        Hz read over ``rpm_range``, default the order map's speeds).
    lines : sequence of Line, optional
        The machine's lines: those with an order are offered in ``line_choice``.
    interactive : bool, optional
        None (default): the interactive view when ipympl is installed, else the slider view
        with a one-line note; True: the interactive view (InputError without ipympl); False:
        the slider view.

    Attributes
    ----------
    interactive : bool
        Which view is shown.
    views : dict of str to FigureView
        Interactive view: each figure (``"order map"``, ``"frequency map"``, ``"order cuts"``,
        ``"spectrum"``) with its ipympl canvas (``views[name].canvas``).
    view_choice : ipywidgets.ToggleButtons
        Interactive view: the figure shown.
    limits : ipywidgets.HTML
        The limits shown (class ``foldline-view-limits``): the zoom read back.
    rpm_range, order_range : ipywidgets.FloatRangeSlider
        Slider view: the zoom.
    cursor_rpm, cursor_order : ipywidgets.FloatSlider
        Slider view: the cursor.
    marker_order : ipywidgets.FloatText
        Order whose harmonics are marked (0: none); ``harmonics`` how many.
    line_choice : ipywidgets.Dropdown
        A machine line's order for ``marker_order``.
    sideband_spacing : ipywidgets.FloatText
        Sideband spacing, orders (0: none); ``sidebands`` how many each side.
    readout : ipywidgets.HTML
        The read-out (class ``foldline-readout``).
    note : ipywidgets.HTML
        Why the slider view is shown, when ipympl is missing.
    image : ipywidgets.Image
        Slider view: the picture.
    widget : ipywidgets.VBox
    """

    def __init__(self, order_map, *, unit="", valid=None, dpi=80, frequency_map=None, cuts=(), spectrum=None,
                 rpm_range=None, lines=None, interactive=None):
        self.map = order_map
        self.unit = unit or ""
        self.valid = valid
        self.dpi = dpi
        available = live.ipympl_available()
        if interactive and not available:
            raise InputError("MapExplorer(interactive=True) needs the ipympl package: pip install ipympl "
                             "(part of the notebook extra), then restart the kernel; or pass interactive=False")
        self.interactive = available if interactive is None else bool(interactive)
        rpm = np.asarray(order_map.rpm, dtype=float)
        self._rpm_span = (float(np.nanmin(rpm)), float(np.nanmax(rpm)))
        style = {"description_width": "110px"}
        self.marker_order = widgets.FloatText(value=0.0, description="mark order", style=style)
        self.line_choice = widgets.Dropdown(options=self._line_options(lines), value=0.0,
                                            description="or a line", style=style)
        self.harmonics = widgets.BoundedIntText(value=3, min=1, max=20, description="harmonics", style=style)
        self.sideband_spacing = widgets.FloatText(value=0.0, description="sideband step", style=style)
        self.sidebands = widgets.BoundedIntText(value=2, min=0, max=10, description="sidebands", style=style)
        self.readout = widgets.HTML(live.readout_html(None))
        self.readout.add_class("foldline-readout-box")
        self.limits = widgets.HTML()
        self.limits.add_class("foldline-view-limits")
        self.note = widgets.HTML()
        self.line_choice.observe(self._on_line_choice, names="value")
        markers = widgets.VBox([widgets.HBox([self.marker_order, self.line_choice]),
                                widgets.HBox([self.harmonics, self.sideband_spacing, self.sidebands])])
        if self.interactive:
            body = self._build_interactive(frequency_map, cuts, spectrum, rpm_range, lines)
        else:
            if interactive is None:
                self.note.value = f'<div class="foldline-note">{live.IPYMPL_MISSING_NOTE}</div>'
            body = self._build_sliders(style)
        self.widget = widgets.VBox([widgets.HTML(STYLE), self.note, body[0], markers, self.readout, self.limits,
                                    *body[1:]])
        self.widget.add_class("foldline-map-explorer")
        for w in (self.marker_order, self.harmonics, self.sideband_spacing, self.sidebands):
            w.observe(lambda _change: self.refresh(), names="value")
        self.refresh()

    @classmethod
    def from_analysis(cls, analysis, **options):
        """An explorer of a :class:`~workbench.runs.analysis.RunAnalysis`: its order map, frequency
        map, order cuts and spectrum, unit, valid region and the machine's lines."""
        kw = {"unit": analysis.unit, "valid": analysis.valid, "frequency_map": analysis.rf_map,
              "cuts": analysis.cuts, "spectrum": analysis.spectrum, "lines": analysis.lines}
        kw.update(options)
        return cls(analysis.order_map, **kw)

    @staticmethod
    def _line_options(lines):
        opts = [("(none)", 0.0)]
        seen = set()
        for ln in lines or ():
            if ln.order is not None and ln.order > 0 and ln.order not in seen:
                seen.add(ln.order)
                opts.append((f"{ln.name} (order {ln.order:.4g})", float(ln.order)))
        return opts

    def _on_line_choice(self, change):
        if change["new"]:
            self.marker_order.value = change["new"]

    # -- the two views -------------------------------------------------------------------------
    def _build_sliders(self, style):
        rpm = np.asarray(self.map.rpm, dtype=float)
        order = np.asarray(self.map.order, dtype=float)
        r0, r1 = float(np.nanmin(rpm)), float(np.nanmax(rpm))
        o1 = float(order[-1])
        wide = widgets.Layout(width="420px")
        step_o = float(order[1] - order[0]) if order.size > 1 else 0.1
        step_r = max((r1 - r0) / 500, 1e-3)
        self.rpm_range = widgets.FloatRangeSlider(value=(r0, r1), min=r0, max=r1, step=step_r,
                                                  description="speed (rpm)", style=style, layout=wide,
                                                  continuous_update=False)
        self.order_range = widgets.FloatRangeSlider(value=(0.0, o1), min=0.0, max=o1, step=step_o,
                                                    description="orders", style=style, layout=wide,
                                                    continuous_update=False)
        self.cursor_rpm = widgets.FloatSlider(value=0.5 * (r0 + r1), min=r0, max=r1, step=step_r,
                                              description="cursor rpm", style=style, layout=wide,
                                              continuous_update=False)
        self.cursor_order = widgets.FloatSlider(value=min(1.0, o1), min=0.0, max=o1, step=step_o,
                                                description="cursor order", style=style, layout=wide,
                                                continuous_update=False)
        self.image = widgets.Image(format="png", layout=widgets.Layout(max_width="100%"))
        self.image.add_class("foldline-figure")
        for w in (self.rpm_range, self.order_range, self.cursor_rpm, self.cursor_order):
            w.observe(lambda _change: self.refresh(), names="value")
        self.views = {}
        return [widgets.VBox([self.rpm_range, self.order_range, self.cursor_rpm, self.cursor_order]), self.image]

    def _build_interactive(self, frequency_map, cuts, spectrum, rpm_range, lines):
        views = [live.order_map_view(self.map, unit=self.unit, valid=self.valid, title="Order map explorer")]
        if frequency_map is not None:
            views.append(live.frequency_map_view(frequency_map, unit=self.unit, valid=self.valid))
        if cuts:
            views.append(live.order_cuts_view(cuts, unit=self.unit, valid=self.valid))
        if spectrum is not None:
            views.append(live.spectrum_view(spectrum, rpm_range=rpm_range or self._rpm_span, unit=self.unit,
                                            valid=self.valid))
        self.views = {v.name: v for v in views}
        for v in views:
            v.canvas = live.interactive_canvas(v.figure)
            v.canvas.add_class("foldline-live-figure")
            self._connect(v)
        self.view_choice = widgets.ToggleButtons(options=list(self.views), value="order map",
                                                 description="figure", style={"description_width": "50px"})
        self.view_choice.add_class("foldline-view-choice")
        self.stage = widgets.Box([self.views["order map"].canvas])
        self.view_choice.observe(self._on_view_choice, names="value")
        self._show_limits()
        return [self.view_choice, self.stage]

    def _connect(self, view):
        unit = self.unit

        def on_move(event):
            if event.inaxes is not view.ax:
                return
            self.readout.value = live.readout_html(view.readout(event.xdata, event.ydata), unit)

        def on_click(event):
            toolbar = getattr(view.canvas, "toolbar", None)
            if event.inaxes is not view.ax or event.button != 1 or (toolbar is not None and str(toolbar.mode)):
                return
            r = view.readout(event.xdata, event.ydata)
            if r is not None and r.order > 0:
                self.marker_order.value = round(r.order, 4)

        def on_limits(_ax):
            if self.view_choice.value == view.name:
                self._show_limits()

        view.canvas.mpl_connect("motion_notify_event", on_move)
        view.canvas.mpl_connect("button_press_event", on_click)
        view.ax.callbacks.connect("xlim_changed", on_limits)
        view.ax.callbacks.connect("ylim_changed", on_limits)

        def coord(x, y):  # the canvas footer: the same read-out
            r = view.readout(x, y)
            return "" if r is None else r.text(unit)

        view.ax.format_coord = coord

    def _on_view_choice(self, change):
        self.stage.children = [self.views[change["new"]].canvas]
        self._show_limits()

    def _show_limits(self):
        view = self.views[self.view_choice.value]
        self.limits.value = f'<div class="foldline-note foldline-limits-text">{view.limits_text()}</div>'

    # -- read-out ------------------------------------------------------------------------------
    def readout_at(self, rpm: float, order: float) -> dict:
        """The map cell nearest (rpm, order): ``rpm, order, hz, amplitude, level_db`` (re the map's maximum)."""
        view = self.views.get("order map")
        if view is None:
            reader = live._map_reader("order map", self.map.rpm, self.map.order, self.map.amplitude, True)
            return reader(rpm, order).to_dict()
        return view.readout(rpm, order).to_dict()

    def marker_orders(self) -> dict:
        """Orders marked: ``{"harmonics": [...], "sidebands": [...]}`` (empty without a marked order)."""
        base = float(self.marker_order.value or 0.0)
        if base <= 0:
            return {"harmonics": [], "sidebands": []}
        harm = [base * h for h in range(1, int(self.harmonics.value) + 1)]
        step = float(self.sideband_spacing.value or 0.0)
        side = []
        if step > 0:
            for h in harm:
                for j in range(1, int(self.sidebands.value) + 1):
                    side += [h - j * step, h + j * step]
        return {"harmonics": harm, "sidebands": [s for s in side if s > 0]}

    # -- drawing -------------------------------------------------------------------------------
    def _zoom(self):
        if self.interactive:
            ax = self.views["order map"].ax
            return ax.get_xlim(), ax.get_ylim()
        return self.rpm_range.value, self.order_range.value

    def figure(self):
        """The order map as now zoomed, with the markers (a new matplotlib Figure, Agg; slider view: and the cursor)."""
        (r0, r1), (o0, o1) = self._zoom()
        fig = plot_order_map(self.map, unit=self.unit, valid=self.valid, title="Order map explorer")
        ax = fig.axes[0]
        ax.set_xlim(r0, r1)
        ax.set_ylim(o0, o1)
        if not self.interactive:
            ax.axvline(self.cursor_rpm.value, color="white", lw=0.6, alpha=0.8)
            ax.axhline(self.cursor_order.value, color="white", lw=0.6, alpha=0.8)
        marks = self.marker_orders()
        for o in marks["harmonics"]:
            ax.axhline(o, color=live.HARMONIC_COLOUR, lw=0.8, ls="--", alpha=0.9)
        for o in marks["sidebands"]:
            ax.axhline(o, color=live.SIDEBAND_COLOUR, lw=0.6, ls=":", alpha=0.9)
        return fig

    def refresh(self):
        """Redraw the markers (interactive view), or the picture and the read-out (slider view)."""
        if self.interactive:
            marks = self.marker_orders()
            for view in self.views.values():
                view.draw_markers(marks)
                view.canvas.draw_idle()
            return
        r = live.Readout("cursor", **{k: v for k, v in self.readout_at(self.cursor_rpm.value,
                                                                       self.cursor_order.value).items()})
        self.readout.value = live.readout_html(r, self.unit)
        lo_r, hi_r = self.rpm_range.value
        lo_o, hi_o = self.order_range.value
        self.limits.value = (f'<div class="foldline-note foldline-limits-text">shown: rpm {lo_r:.4g} to {hi_r:.4g}, '
                             f'order {lo_o:.4g} to {hi_o:.4g}</div>')
        self.image.value = figure_bytes(self.figure(), dpi=self.dpi)

    def show(self):
        """The widget, for ``display``."""
        return self.widget

    def _ipython_display_(self):
        from IPython.display import display

        display(self.widget)
