"""Order map explorer: zoom, a cursor read-out, and harmonic and sideband markers of a chosen line.

A notebook widget built from ipywidgets alone (no extra dependency, and it works in a
notebook rendered from a server and in an exported HTML with a live kernel): range sliders zoom
the speed and order axes, two sliders place a cursor whose read-out gives order, Hz, rpm and
level of the map cell under it, and a chosen order gets markers at its harmonics and at its
sidebands (a spacing in orders, e.g. a shaft's order for gear-mesh sidebands).

    explorer = MapExplorer(analysis.order_map, unit=analysis.unit)
    explorer            # shows itself in a notebook
"""

from __future__ import annotations

import html

import ipywidgets as widgets
import numpy as np

from workbench.plots import plot_order_map
from workbench.plots.common import figure_bytes
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
        Shaded on the map (see :func:`~workbench.plots.angle.plot_order_map`).

    Attributes
    ----------
    rpm_range, order_range : ipywidgets.FloatRangeSlider
        The zoom.
    cursor_rpm, cursor_order : ipywidgets.FloatSlider
        The cursor.
    marker_order : ipywidgets.FloatText
        Order whose harmonics are marked (0: none); ``harmonics`` how many.
    sideband_spacing : ipywidgets.FloatText
        Sideband spacing, orders (0: none); ``sidebands`` how many each side.
    readout : ipywidgets.HTML
    image : ipywidgets.Image
    widget : ipywidgets.VBox
    """

    def __init__(self, order_map, *, unit="", valid=None, dpi=80):
        self.map = order_map
        self.unit = unit or ""
        self.valid = valid
        self.dpi = dpi
        rpm = np.asarray(order_map.rpm, dtype=float)
        order = np.asarray(order_map.order, dtype=float)
        r0, r1 = float(np.nanmin(rpm)), float(np.nanmax(rpm))
        o1 = float(order[-1])
        style = {"description_width": "110px"}
        wide = widgets.Layout(width="420px")
        step_o = float(order[1] - order[0]) if order.size > 1 else 0.1
        self.rpm_range = widgets.FloatRangeSlider(value=(r0, r1), min=r0, max=r1, step=max((r1 - r0) / 500, 1e-3),
                                                  description="speed (rpm)", style=style, layout=wide,
                                                  continuous_update=False)
        self.order_range = widgets.FloatRangeSlider(value=(0.0, o1), min=0.0, max=o1, step=step_o,
                                                    description="orders", style=style, layout=wide,
                                                    continuous_update=False)
        self.cursor_rpm = widgets.FloatSlider(value=0.5 * (r0 + r1), min=r0, max=r1, step=max((r1 - r0) / 500, 1e-3),
                                              description="cursor rpm", style=style, layout=wide,
                                              continuous_update=False)
        self.cursor_order = widgets.FloatSlider(value=min(1.0, o1), min=0.0, max=o1, step=step_o,
                                                description="cursor order", style=style, layout=wide,
                                                continuous_update=False)
        self.marker_order = widgets.FloatText(value=0.0, description="mark order", style=style)
        self.harmonics = widgets.BoundedIntText(value=3, min=1, max=20, description="harmonics", style=style)
        self.sideband_spacing = widgets.FloatText(value=0.0, description="sideband step", style=style)
        self.sidebands = widgets.BoundedIntText(value=2, min=0, max=10, description="sidebands", style=style)
        self.readout = widgets.HTML()
        self.image = widgets.Image(format="png", layout=widgets.Layout(max_width="100%"))
        controls = widgets.VBox([self.rpm_range, self.order_range, self.cursor_rpm, self.cursor_order,
                                 widgets.HBox([self.marker_order, self.harmonics]),
                                 widgets.HBox([self.sideband_spacing, self.sidebands])])
        self.widget = widgets.VBox([controls, self.readout, self.image])
        for w in (self.rpm_range, self.order_range, self.cursor_rpm, self.cursor_order, self.marker_order,
                  self.harmonics, self.sideband_spacing, self.sidebands):
            w.observe(lambda _change: self.refresh(), names="value")
        self.refresh()

    # -- read-out ------------------------------------------------------------------------------
    def readout_at(self, rpm: float, order: float) -> dict:
        """The map cell nearest (rpm, order): ``rpm, order, hz, amplitude, level_db`` (re the map's maximum)."""
        rows = np.asarray(self.map.rpm, dtype=float)
        cols = np.asarray(self.map.order, dtype=float)
        i = int(np.nanargmin(np.abs(rows - rpm)))
        k = int(np.argmin(np.abs(cols - order)))
        amp = float(self.map.amplitude[i, k])
        top = float(np.nanmax(self.map.amplitude))
        level = 20.0 * np.log10(amp / top) if amp > 0 and top > 0 else float("nan")
        return {"rpm": float(rows[i]), "order": float(cols[k]), "hz": float(cols[k] * rows[i] / 60.0),
                "amplitude": amp, "level_db": level}

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
    def figure(self):
        """The zoomed map with the cursor and the markers (a new matplotlib Figure)."""
        lo_o, hi_o = self.order_range.value
        fig = plot_order_map(self.map, unit=self.unit, valid=self.valid, title="Order map explorer")
        ax = fig.axes[0]
        ax.set_xlim(*self.rpm_range.value)
        ax.set_ylim(lo_o, hi_o)
        ax.axvline(self.cursor_rpm.value, color="white", lw=0.6, alpha=0.8)
        ax.axhline(self.cursor_order.value, color="white", lw=0.6, alpha=0.8)
        marks = self.marker_orders()
        for o in marks["harmonics"]:
            ax.axhline(o, color="#E69F00", lw=0.8, ls="--", alpha=0.9)
        for o in marks["sidebands"]:
            ax.axhline(o, color="#56B4E9", lw=0.6, ls=":", alpha=0.9)
        return fig

    def refresh(self):
        """Redraw the picture and the read-out."""
        r = self.readout_at(self.cursor_rpm.value, self.cursor_order.value)
        unit = html.escape(self.unit)
        self.readout.value = STYLE + (
            f'<div class="foldline-note"><b>cursor</b>: order {r["order"]:.3f}, {r["hz"]:.1f} Hz, '
            f'{r["rpm"]:.0f} rpm: {r["amplitude"]:.4g} {unit} ({r["level_db"]:.1f} dB re the map\'s maximum)</div>')
        self.image.value = figure_bytes(self.figure(), dpi=self.dpi)

    def show(self):
        """The widget, for ``display``."""
        return self.widget

    def _ipython_display_(self):
        from IPython.display import display

        display(self.widget)
