"""Interactive figures in a notebook: zoom and pan with the mouse, a read-out of the data under it.

The figures are the package's own (:mod:`workbench.plots`), drawn once; an ipympl canvas (the
matplotlib widget backend, an ipywidgets ``DOMWidget``) shows them in the notebook with its
toolbar (zoom to rectangle, pan, back, home).  Our own handlers do the rest:

- ``motion_notify_event``: the read-out of the data under the mouse -- the nearest cell of a map
  (order, Hz, rpm, level), the nearest point of the nearest order cut, the nearest bin of the
  spectrum -- written to a widget label (class ``foldline-readout``) and to the canvas footer
  (``Axes.format_coord``);
- ``xlim_changed`` / ``ylim_changed``: the limits shown, written to a label (class
  ``foldline-view-limits``);
- ``button_press_event`` (a left click outside zoom and pan mode): the order under the mouse is
  chosen for the harmonic and sideband markers, which every figure draws in its own axes.

The PNG path (reports, panels' pictures, ``foldline --out``) does not come here: it renders the
same figures with Agg.  Without ipympl, :func:`ipympl_available` is False and the explorer falls
back to its slider view.
"""

from __future__ import annotations

import html
import importlib.util
import math
import warnings
from dataclasses import dataclass

import numpy as np

from workbench.errors import InputError

__all__ = ["ipympl_available", "interactive_canvas", "Readout", "FigureView", "order_map_view",
           "frequency_map_view", "order_cuts_view", "spectrum_view", "IPYMPL_MISSING_NOTE"]

#: The fallback's one-line note.
IPYMPL_MISSING_NOTE = ("ipympl is not installed, so this is the slider view; for zoom, pan and a "
                       "read-out under the mouse install it (pip install ipympl, part of the "
                       "notebook extra) and restart the kernel.")

#: Marker colours: harmonics (orange) and sidebands (sky blue) of the Wong palette
#: (Nature Methods 8:441, 2011), as in the slider view.
HARMONIC_COLOUR, SIDEBAND_COLOUR = "#E69F00", "#56B4E9"

#: Width of ipympl's toolbar on the canvas's left edge (it floats over the figure), px.
TOOLBAR_PX = 44

#: Resolution of the interactive canvases (dots per inch): a 10-inch figure is 800 px wide.
INTERACTIVE_DPI = 80


def ipympl_available() -> bool:
    """True when the ipympl package (matplotlib's notebook widget backend) can be imported."""
    return importlib.util.find_spec("ipympl") is not None


def interactive_canvas(fig):
    """Attach an ipympl canvas to ``fig`` and return it (an ipywidgets widget to display).

    Importing ipympl selects it as pyplot's backend; the backend in use before is put back, so
    pyplot figures of the notebook are drawn as they were (``%matplotlib widget`` selects ipympl
    for them).  The toolbar is always shown, the "Figure 1" header is not.

    Raises
    ------
    InputError
        ipympl is not installed.
    """
    import sys

    import matplotlib
    from matplotlib.layout_engine import ConstrainedLayoutEngine

    if not ipympl_available():
        raise InputError("interactive figures need the ipympl package: pip install ipympl "
                         "(part of the notebook extra), then restart the kernel")
    raw = dict.__getitem__(matplotlib.rcParams, "backend")
    from ipympl.backend_nbagg import Canvas, FigureManager

    if dict.__getitem__(matplotlib.rcParams, "backend") != raw:
        if "matplotlib.pyplot" in sys.modules and isinstance(raw, str):
            matplotlib.use(raw)
        else:
            dict.__setitem__(matplotlib.rcParams, "backend", raw)
    fig.set_dpi(INTERACTIVE_DPI)
    engine = fig.get_layout_engine()
    if isinstance(engine, ConstrainedLayoutEngine):  # room on the left for the toolbar, which floats
        margin = TOOLBAR_PX / fig.bbox.width
        engine.set(rect=(margin, 0.0, 1.0 - margin, 1.0))
    canvas = Canvas(fig)
    with warnings.catch_warnings():  # ipympl's toolbar passes its canvas on to traitlets
        warnings.simplefilter("ignore", DeprecationWarning)
        manager = FigureManager(canvas, id(fig))
    canvas.manager = manager
    canvas.header_visible = False
    canvas.toolbar_visible = "visible"
    canvas.toolbar_position = "left"
    canvas.resizable = False
    canvas.layout.min_width = f"{int(fig.bbox.width) + 40}px"
    return canvas


@dataclass(frozen=True)
class Readout:
    """What lies under the mouse in one figure.

    Attributes
    ----------
    view : str
        The figure: ``"order map"``, ``"frequency map"``, ``"order cuts"`` or ``"spectrum"``.
    order : float
        Order of the cell, cut or bin (multiples of the reference shaft speed).
    amplitude : float
        Its amplitude (the figure's unit); NaN where the map has no data.
    level_db : float
        ``20 log10(amplitude / maximum)``: dB re the figure's maximum.
    rpm, hz : float or None
        Speed (rpm) and frequency (Hz, order x rpm / 60) of the cell; None for the averaged
        spectrum, which gives ``rpm_range`` and ``hz_range`` instead.
    """

    view: str
    order: float
    amplitude: float
    level_db: float
    rpm: float | None = None
    hz: float | None = None
    rpm_range: tuple | None = None
    hz_range: tuple | None = None

    def to_dict(self) -> dict:
        """``rpm, order, hz, amplitude, level_db`` (and the ranges of the averaged spectrum)."""
        out = {"rpm": self.rpm, "order": self.order, "hz": self.hz, "amplitude": self.amplitude,
               "level_db": self.level_db}
        if self.rpm_range is not None:
            out["rpm_range"], out["hz_range"] = self.rpm_range, self.hz_range
        return out

    def text(self, unit: str = "") -> str:
        """One line: ``order 29.000, 676.7 Hz, 1400 rpm: 2 m/s^2 (-8.0 dB re the maximum)``."""
        where = f"order {self.order:.3f}, "
        if self.rpm is not None:
            where += f"{self.hz:.1f} Hz, {self.rpm:.0f} rpm"
        else:
            (h0, h1), (r0, r1) = self.hz_range, self.rpm_range
            where += f"{h0:.1f} to {h1:.1f} Hz over {r0:.0f} to {r1:.0f} rpm"
        level = "no data" if math.isnan(self.amplitude) else (
            f"{self.amplitude:.4g}{(' ' + unit) if unit else ''} ({self.level_db:.1f} dB re the maximum)")
        return f"{where}: {level}"


def _level(amplitude: float, top: float) -> float:
    return 20.0 * math.log10(amplitude / top) if amplitude > 0 and top > 0 else float("nan")


def _nearest(values: np.ndarray, x: float) -> int:
    return int(np.nanargmin(np.abs(values - x)))


class FigureView:
    """One interactive figure: the figure, its axes, the read-out and the marker drawing.

    Parameters
    ----------
    name : str
    figure : matplotlib.figure.Figure
    reader : callable (x, y) -> Readout or None
        The data under the data coordinates (x, y) of ``ax``.
    axis_names : (str, str)
        Names of the x and y quantities in the limits read-back (``"rpm"``, ``"order"``...).
    markers : {"order_y", "order_x", "order_rays", None}
        How a marked order is drawn: a horizontal line (order on y), a vertical line (order on
        x), the ray ``Hz = order x rpm / 60`` (frequency map) or not at all (order cuts).
    """

    def __init__(self, name, figure, reader, axis_names, markers):
        self.name = name
        self.figure = figure
        self.ax = figure.axes[0]
        self.reader = reader
        self.axis_names = axis_names
        self.markers = markers
        self.canvas = None
        self._marker_artists = []

    def readout(self, x: float, y: float):
        """The :class:`Readout` at data coordinates (x, y), or None."""
        if x is None or y is None or not (math.isfinite(x) and math.isfinite(y)):
            return None
        return self.reader(x, y)

    def limits(self) -> dict:
        """The limits shown: ``{x name: (lo, hi), y name: (lo, hi)}``."""
        (x0, x1), (y0, y1) = self.ax.get_xlim(), self.ax.get_ylim()
        return {self.axis_names[0]: (float(x0), float(x1)), self.axis_names[1]: (float(y0), float(y1))}

    def limits_text(self) -> str:
        """``shown: rpm 600 to 1800, order 0 to 50`` (4 significant figures)."""
        return "shown: " + ", ".join(f"{k} {lo:.4g} to {hi:.4g}" for k, (lo, hi) in self.limits().items())

    def draw_markers(self, marks: dict) -> None:
        """Replace the harmonic and sideband markers (``{"harmonics": [...], "sidebands": [...]}``)."""
        for artist in self._marker_artists:
            artist.remove()
        self._marker_artists = []
        if self.markers is None:
            return
        styles = (("harmonics", HARMONIC_COLOUR, "--", 0.9), ("sidebands", SIDEBAND_COLOUR, ":", 0.7))
        xlim, ylim = self.ax.get_xlim(), self.ax.get_ylim()
        for key, colour, ls, lw in styles:
            for o in marks.get(key, ()):
                if self.markers == "order_y":
                    art = self.ax.axhline(o, color=colour, lw=lw, ls=ls, alpha=0.9, gid=f"marker:{key}")
                elif self.markers == "order_x":
                    art = self.ax.axvline(o, color=colour, lw=lw, ls=ls, alpha=0.9, gid=f"marker:{key}")
                else:
                    rpm = np.linspace(*sorted(self.ax.get_xlim()), 50)
                    (art,) = self.ax.plot(rpm, o * rpm / 60.0, color=colour, lw=lw, ls=ls, alpha=0.9,
                                          gid=f"marker:{key}")
                self._marker_artists.append(art)
        self.ax.set_xlim(xlim)  # markers never move the view
        self.ax.set_ylim(ylim)


def _map_reader(view, rows, cols, amp, col_is_order):
    rows = np.asarray(rows, dtype=float)
    cols = np.asarray(cols, dtype=float)
    amp = np.asarray(amp, dtype=float)
    top = float(np.nanmax(amp)) if amp.size else float("nan")

    def read(x, y):
        i, k = _nearest(rows, x), _nearest(cols, y)
        a, rpm = float(amp[i, k]), float(rows[i])
        if col_is_order:
            order, hz = float(cols[k]), float(cols[k]) * rpm / 60.0
        else:
            hz = float(cols[k])
            order = hz * 60.0 / rpm if rpm > 0 else float("nan")
        return Readout(view, order, a, _level(a, top), rpm=rpm, hz=hz)

    return read


def order_map_view(order_map, *, unit="", valid=None, **plot_options) -> FigureView:
    """The order map (:func:`~workbench.plots.angle.plot_order_map`) with a cell read-out."""
    from workbench.plots import plot_order_map

    fig = plot_order_map(order_map, unit=unit, valid=valid, **plot_options)
    reader = _map_reader("order map", order_map.rpm, order_map.order, order_map.amplitude, True)
    return FigureView("order map", fig, reader, ("rpm", "order"), "order_y")


def frequency_map_view(rf_map, *, unit="", valid=None, **plot_options) -> FigureView:
    """The frequency map (:func:`~workbench.plots.angle.plot_frequency_map`); order = Hz x 60 / rpm."""
    from workbench.plots import plot_frequency_map

    fig = plot_frequency_map(rf_map, unit=unit, valid=valid, **plot_options)
    reader = _map_reader("frequency map", rf_map.rpm, rf_map.hz, rf_map.amplitude, False)
    return FigureView("frequency map", fig, reader, ("rpm", "Hz"), "order_rays")


def order_cuts_view(cuts, *, unit="", valid=None, **plot_options) -> FigureView:
    """The order cuts (:func:`~workbench.plots.angle.plot_order_cuts`): the nearest cut's point.

    The cut nearest the mouse is the one whose curve passes closest to it on the screen (the
    amplitude axis may be logarithmic), at the speed nearest the mouse.
    """
    from workbench.plots import plot_order_cuts

    if not cuts:
        raise InputError("order cuts view: no cuts given; cut at least one order")
    fig = plot_order_cuts(cuts, unit=unit, valid=valid, **plot_options)
    ax = fig.axes[0]
    data = [(float(c.order), np.asarray(c.rpm, dtype=float), np.asarray(c.amplitude, dtype=float)) for c in cuts]
    top = max((float(np.nanmax(a)) for _, _, a in data if a.size and np.isfinite(a).any()), default=float("nan"))

    def read(x, y):
        cursor = ax.transData.transform((x, y))[1]
        best = None
        for order, rpm, amp in data:
            if not rpm.size:
                continue
            i = _nearest(rpm, x)
            a = float(amp[i])
            if not (math.isfinite(a) and (a > 0 or ax.get_yscale() != "log")):
                continue
            dist = abs(float(ax.transData.transform((rpm[i], a))[1]) - cursor)
            if best is None or dist < best[0]:
                best = (dist, order, float(rpm[i]), a)
        if best is None:
            return None
        _, order, r, a = best
        return Readout("order cuts", order, a, _level(a, top), rpm=r, hz=order * r / 60.0)

    return FigureView("order cuts", fig, read, ("rpm", unit or "amplitude"), None)


def spectrum_view(spectrum, *, rpm_range, unit="", valid=None, **plot_options) -> FigureView:
    """The averaged order spectrum: the nearest bin, its Hz over the run's speed range."""
    from workbench.plots import plot_order_spectrum

    lo, hi = (float(v) for v in rpm_range)
    fig = plot_order_spectrum(spectrum, unit=unit, valid=valid, rpm_range=(lo, hi), **plot_options)
    order = np.asarray(spectrum.order, dtype=float)
    amp = np.asarray(spectrum.amplitude, dtype=float)
    top = float(np.nanmax(amp)) if amp.size else float("nan")

    def read(x, _y):
        k = _nearest(order, x)
        o, a = float(order[k]), float(amp[k])
        return Readout("spectrum", o, a, _level(a, top), rpm_range=(lo, hi),
                       hz_range=(o * lo / 60.0, o * hi / 60.0))

    return FigureView("spectrum", fig, read, ("order", unit or "amplitude"), "order_x")


def readout_html(readout, unit="") -> str:
    """The read-out label's markup (class ``foldline-readout``)."""
    if readout is None:
        body = "move the mouse over the figure for its read-out"
    else:
        body = f"<b>{html.escape(readout.view)}</b>: {html.escape(readout.text(unit))}"
    return f'<div class="foldline-readout foldline-note">{body}</div>'
