"""Angle-domain panel: a recorded run from tacho to order map, with the fold prediction overlaid.

The panel holds a :class:`~workbench.runs.pipeline.TrackingPipeline` (the tracked signal
kept); a changed control hands its value to the pipeline, which redoes only the stages the
changed setting affects and keeps the rest (``panel.runs`` counts the stage runs):

1. speed -- the speed source and its settings (tacho pulses, an order's ridge in the
   vibration, or an analogue speed channel; the tacho check figure);
2. angle -- computed order tracking of the shown channel and those ticked in "track
   together", in one pass (one block plan for all), with a progress bar; samples per rev and
   alias protection redo it, switching the shown channel among the ticked ones does not;
3. spectra -- order map, order spectrum and its peaks: block length and window redo them;
4. cuts -- the orders cut and the cut width;
5. identify -- measured ridges matched with the machine's predicted lines (direct and
   folded) and the lines no prediction explains, after any of the above;
6. order extraction (Vold-Kalman filter, its own tab) -- per (channel, orders, bandwidth,
   filter order): envelopes against rpm, a player for one order's waveform, WAV export.

The controls sit in a strip of three steps, left to right as the analyst works (speed,
angle domain, results and export), each a card with its controls inline; the status line and
the results follow at full width.  The results are shown together on one tab: the order map,
with the orders cut marked on it, beside the order cuts and the order spectrum; the tacho check
and the order extraction have tabs of their own.  Only the figures of the tab on show are
drawn, and only when what they show changed; the others are drawn when their tab is opened.
Tables (CSV) and figures (PNG) are written to a chosen folder by two buttons.
"""

from __future__ import annotations

import html
import math
import warnings
from pathlib import Path

import ipywidgets as widgets
import numpy as np
import pandas as pd

from workbench.angle import DEFAULT_SPEED_TOLERANCE, AngleSignal
from workbench.errors import FoldlineError, FoldlineWarning, InputError, OutputExistsError
from workbench.plots import (plot_order_cuts, plot_order_envelopes, plot_order_map, plot_order_spectrum,
                             plot_tacho_check, save_figure, speed_check_options)
from workbench.plots.angle import OVERLAYS
from workbench.plots.common import figure_bytes
from workbench.runs import Run, atomic_output, read_run
from workbench.runs.pipeline import STAGES, TrackingPipeline
from workbench.runs.settings import (DEFAULT_SAMPLES_PER_REV, TrackingSettings,
                                     usable_max_order)
from workbench.sampling import angle_settings
from workbench.textparse import parse_orders
from workbench.ui._common import (STYLE, Cache, as_machine, as_plan, collect_warnings, error_html,
                                  html_table, step_card)

__all__ = ["AngleDomainPanel", "WINDOWS", "SPEED_SOURCES"]

#: Windows offered for the order spectra: (label, scipy.signal.get_window name).
WINDOWS = (("Hann", "hann"), ("flat top (amplitudes)", "flattop"), ("Hamming", "hamming"),
           ("Blackman-Harris", "blackmanharris"), ("rectangular", "boxcar"))
#: Speed sources offered: (label, source).
SPEED_SOURCES = (("tacho", "tacho"), ("vibration (order ridge)", "vibration"),
                 ("speed channel", "channel"))
_DPI = 80


class AngleDomainPanel:
    """Interactive angle-domain analysis of one recorded run.

    Parameters
    ----------
    run : Run or path
        The recording (a path is read with :func:`workbench.runs.read_run`; its sidecar names
        the tacho channel, pulses per rev and the machine file).
    machine : Machine or path, optional
        Default: the run's machine file.  Without a machine nothing is predicted.
    plan : Plan or path, optional
        Gives the default samples per rev and block length (the advisor's angle settings).
    channel : str, optional
        Vibration channel (default: the first channel that is not the tacho).
    export_folder : path, optional
        Folder the export buttons write to at first (default ``foldline_export``).

    Attributes
    ----------
    channel : ipywidgets.Dropdown
    samples_per_rev : ipywidgets.Dropdown
        Angle-domain samples per revolution (order Nyquist = half of it).
    revs_per_block : ipywidgets.BoundedIntText
        Block length in revolutions (order resolution = 1 / block length).
    window : ipywidgets.Dropdown
    protect : ipywidgets.Checkbox
        Alias protection of the tracker (speed-tracking low-pass).
    cut_orders : ipywidgets.Text
        Orders to cut against speed, comma separated.
    cut_bandwidth : ipywidgets.BoundedFloatText
        Band summed in each cut, orders (0: four order bins).
    speed_source : ipywidgets.Dropdown
        Where the speed comes from: "tacho", "vibration" (the ridge of ``speed_order`` searched
        over ``speed_range``, rpm "LO, HI", in the vibration channel) or "channel" (the analogue
        ``speed_channel`` times ``speed_scale`` rpm per unit).
    speed_order, speed_scale : ipywidgets.FloatText
    speed_range : ipywidgets.Text
    speed_channel : ipywidgets.Dropdown
    folder : ipywidgets.Text
        Folder the export buttons write to (created if missing).
    overwrite : ipywidgets.Checkbox
        Let the export replace files of the same name.
    export_tables, export_figures : ipywidgets.Button
    progress : ipywidgets.IntProgress
        Samples tracked so far.
    tabs : ipywidgets.Tab
        0: tacho check; 1: the results together (order map with the orders cut marked, order
        cuts, order spectrum and peaks); 2: order extraction.
    tacho_figure, map_figure, cuts_figure, spectrum_figure : ipywidgets.Image
    tacho_info : ipywidgets.HTML
    aliases : ipywidgets.HTML
        Predicted lines found in the order map (class ``foldline-identified``), aliases first.
    peaks : ipywidgets.HTML
        Strongest peaks of the order spectrum (class ``foldline-peaks``).
    status : ipywidgets.HTML
        Errors, warnings and what the last export wrote.
    extract_orders, extract_bandwidth, extract_unit, extract_filter_order : ipywidgets
        Order extraction tab: orders extracted together, -3 dB bandwidth (in Hz or in % of
        each order's frequency) and order of the structural equation (Vold-Kalman filter).
    extract_figure : ipywidgets.Image
        Envelopes (amplitude and phase) against rpm.
    extract_play, extract_audio : ipywidgets.Dropdown, ipywidgets.Audio
        The order whose waveform the player holds (normalised to its peak).
    export_waveform : ipywidgets.Button
        Writes ``order_<k>.wav`` and ``order_<k>.csv`` for every extracted order.
    pipeline : TrackingPipeline
        The analysis in stages, with the controls' settings.
    widget : ipywidgets.VBox
    """

    FIGURES = ("tacho", "map", "cuts", "spectrum")

    def __init__(self, run, *, machine=None, plan=None, channel=None, export_folder="foldline_export"):
        self.run = run if isinstance(run, Run) else read_run(run)
        if machine is None and self.run.machine_file:
            machine = self.run.machine_file
        self.machine = None if machine is None else as_machine(machine)
        self.plan = None if plan is None else as_plan(plan)
        self.lines = () if self.machine is None else self.machine.lines()
        spr, rpb = 256, 32
        if self.machine is not None and self.plan is not None:
            with collect_warnings():
                s = angle_settings(self.lines, self.plan)
            spr, rpb = s.samples_per_rev, s.revs_per_block
        # Fixed for the panel: no frequency map (not shown); the plan's anti-alias filter bounds
        # the valid region; the tacho fit aims at the default speed tolerance, so that a block
        # length or samples-per-rev change does not refit the speed.
        self._fixed = dict(rf_map=False, speed_tolerance=DEFAULT_SPEED_TOLERANCE,
                           aa_filter=None if self.plan is None else self.plan.filter)
        self.pipeline = None
        self._signals = {}
        self._estimate = None
        self._drawn = {}
        self._build(channel, spr, rpb)
        self._build_extraction()
        self.folder.value = str(export_folder)
        self._controls = (self.channel, self.channels, self.samples_per_rev, self.protect,
                          self.revs_per_block, self.window, self.cut_orders, self.cut_bandwidth,
                          self.speed_source, self.speed_order,
                          self.speed_range, self.speed_channel, self.speed_scale)
        self._defaults = {c: c.value for c in self._controls}
        self._quiet = False
        self.refresh()
        for control in self._controls:
            control.observe(self._on_change, names="value")
        self.overlay.observe(lambda change: self._draw_shown(), names="value")
        self.tabs.observe(lambda change: self._draw_shown(), names="selected_index")
        self.export_tables.on_click(lambda _b: self.export("tables"))
        self.export_figures.on_click(lambda _b: self.export("figures"))

    # -- controls -------------------------------------------------------------------------
    def _build(self, channel, spr, rpb):
        run = self.run
        # Controls fill their step's card; descriptions get a fixed column that holds the
        # longest one ("block length (revs)") without clipping.
        style, wide = {"description_width": "140px"}, widgets.Layout(width="98%")
        names = [n for n in run.channel_names if n != run.tacho] or list(run.channel_names)
        self.channel = widgets.Dropdown(options=names, value=channel or names[0], description="vibration channel",
                                        style=style, layout=wide)
        self.channels = widgets.SelectMultiple(options=names, value=(self.channel.value,),
                                               rows=min(4, len(names)), description="track together",
                                               style=style, layout=wide)
        sizes = sorted({2 ** k for k in range(4, 13)} | {int(spr)})
        self.samples_per_rev = widgets.Dropdown(options=sizes, value=int(spr), description="samples per rev",
                                                style=style, layout=wide)
        self.revs_per_block = widgets.BoundedIntText(value=int(rpb), min=1, max=4096,
                                                     description="block length (revs)", style=style, layout=wide)
        self.window = widgets.Dropdown(options=WINDOWS, value="hann", description="window", style=style,
                                       layout=wide)
        self.protect = widgets.Checkbox(value=True, description="alias protection (tracking low-pass)",
                                        indent=False, layout=wide)
        self.overlay = widgets.ToggleButtons(options=OVERLAYS, value="none", description="predicted lines",
                                             style={"description_width": "100px", "button_width": "70px"},
                                             tooltips=("the measurement alone", "lines matched to measured ridges",
                                                       "every predicted line"))
        self.cut_orders = widgets.Text(value=", ".join(f"{o:.4g}" for o in self.default_cut_orders(spr)),
                                       description="orders to cut", style=style, layout=wide,
                                       continuous_update=False)
        self.speed_source = widgets.Dropdown(options=SPEED_SOURCES, value="tacho", description="speed from",
                                             style=style, layout=wide)
        self.speed_order = widgets.FloatText(value=1.0, description="speed order", style=style, layout=wide)
        self.speed_range = widgets.Text(value="", placeholder="LO, HI", description="speed range (rpm)",
                                        style=style, layout=wide, continuous_update=False)
        self.speed_channel = widgets.Dropdown(options=list(run.channel_names), description="speed channel",
                                              style=style, layout=wide)
        self.speed_scale = widgets.FloatText(value=1.0, description="rpm per unit", style=style, layout=wide)
        self.cut_bandwidth = widgets.BoundedFloatText(value=0.0, min=0.0, max=1000.0, step=0.05,
                                                      description="cut width (orders)", style=style,
                                                      layout=wide, tooltip="0: four order bins")
        self.cut_orders.add_class("foldline-cut-orders")
        self.folder = widgets.Text(value="foldline_export", description="export folder", style=style,
                                   layout=wide)
        self.overwrite = widgets.Checkbox(value=False, description="overwrite files", indent=False)
        button = widgets.Layout(width="auto", min_width="190px")
        self.export_tables = widgets.Button(description="export tables (CSV)", icon="table",
                                            layout=button)
        self.export_figures = widgets.Button(description="export figures (PNG)", icon="image",
                                             layout=button)
        self.progress = widgets.IntProgress(value=0, min=0, max=max(1, run.n_samples), description="tracking",
                                            style=style, layout=wide)
        self.status = widgets.HTML()
        self.status.add_class("foldline-status-box")
        self.tacho_info = widgets.HTML()
        self.aliases = widgets.HTML()
        self.peaks = widgets.HTML()
        image = dict(format="png", layout=widgets.Layout(max_width="100%"))
        self.tacho_figure = widgets.Image(**image)
        self.map_figure = widgets.Image(format="png", layout=widgets.Layout(
            flex="3 1 460px", min_width="420px", max_width="100%", height="auto"))
        self.cuts_figure = widgets.Image(format="png", layout=widgets.Layout(width="100%"))
        self.spectrum_figure = widgets.Image(format="png", layout=widgets.Layout(width="100%"))
        for w in (self.tacho_figure, self.map_figure, self.cuts_figure, self.spectrum_figure):
            w.add_class("foldline-figure")
        # The results together: the order map with the orders cut marked on it, beside the
        # cuts and the spectrum (they stack below the map on a narrow window).
        side = widgets.VBox([self.cuts_figure, self.spectrum_figure, self.peaks],
                            layout=widgets.Layout(flex="2 1 360px", min_width="340px"))
        results = widgets.Box([self.map_figure, side], layout=widgets.Layout(
            display="flex", flex_flow="row wrap", align_items="flex-start", width="100%"))
        results.add_class("foldline-results")
        self.tabs = widgets.Tab(children=[
            widgets.VBox([self.tacho_figure, self.tacho_info]), results])
        for i, title in enumerate(("tacho check", "results")):
            self.tabs.set_title(i, title)
        self.tabs.selected_index = 1
        # The analyst's steps from left to right, each with its controls inline: the speed
        # (which channels, the speed from where), the angle domain (resampling and blocks),
        # the results (what to draw and cut, where to export).  The results sit below at full
        # width.
        steps = widgets.HBox([
            step_card("1 &middot; speed", [self.channel, self.channels, self.speed_source,
                                           self.speed_order, self.speed_range, self.speed_channel,
                                           self.speed_scale, self.progress]),
            step_card("2 &middot; angle domain", [self.samples_per_rev, self.revs_per_block,
                                              self.window, self.protect]),
            step_card("3 &middot; results", [self.overlay, self.cut_orders, self.cut_bandwidth,
                                             self.folder,
                                         self.overwrite,
                                         widgets.HBox([self.export_tables, self.export_figures],
                                                      layout=widgets.Layout(flex_flow="row wrap"))]),
        ], layout=widgets.Layout(flex_flow="row wrap", align_items="stretch", width="100%"))
        steps.add_class("foldline-steps")
        self.header = widgets.HTML()
        self.widget = widgets.VBox([self.header, steps, self.status, self.tabs, self.aliases])
        self.widget.add_class("foldline-angle-panel")

    def _on_change(self, change):
        if not self._quiet:
            self.refresh()

    def reset(self):
        """Put the analysis controls back to the values they opened with, then redo once."""
        self._quiet = True
        try:
            for control, value in self._defaults.items():
                control.value = value
        finally:
            self._quiet = False
        self.refresh()

    def default_cut_orders(self, samples_per_rev=DEFAULT_SAMPLES_PER_REV) -> tuple:
        """The orders cut by default: the one rule of
        :meth:`~workbench.runs.settings.TrackingSettings.cut_orders_for` (order 1 and the lines
        the plan's bands follow) below the usable order ``samples_per_rev / ANALYSER_FACTOR``."""
        return TrackingSettings(samples_per_rev=int(samples_per_rev)).cut_orders_for(
            machine=self.machine, plan=self.plan)

    def _orders(self) -> tuple:
        return parse_orders(self.cut_orders.value, "orders to cut", "1, 29, 58")

    # -- computation ----------------------------------------------------------------------
    def _speed_changes(self) -> dict:
        """The speed fields of the chosen source (the others cleared)."""
        out = dict.fromkeys(("speed_order", "speed_range", "speed_channel", "speed_scale"))
        source = self.speed_source.value
        if source == "vibration":
            text = self.speed_range.value
            try:
                lo, hi = (float(v) for v in text.replace(";", ",").split(","))
            except ValueError:
                raise InputError(f"speed range {text!r}: give the rpm range to search as LO, HI, "
                                 "e.g. 600, 3600") from None
            out.update(speed_order=float(self.speed_order.value), speed_range=(lo, hi))
        elif source == "channel":
            out.update(speed_channel=self.speed_channel.value,
                       speed_scale=float(self.speed_scale.value))
        elif self.run.tacho is None:
            raise InputError(f"{self.run.source or 'run'}: no tacho channel; name one in the run's "
                             "sidecar (tacho_channel), or choose the speed from the vibration or a "
                             "speed channel")
        return out

    def _tracked_channels(self) -> tuple:
        """The channels tracked together: the shown one and those ticked.  In the run's order
        (switching the shown channel among them redoes nothing), except that the speed found in
        the vibration follows the shown channel, which then comes first."""
        shown = self.channel.value
        ticked = set(self.channels.value) | {shown}
        names = [n for n in self.run.channel_names if n in ticked]
        if self.speed_source.value == "vibration":
            names = [shown] + [n for n in names if n != shown]
        return tuple(names)

    def _settings_changes(self) -> dict:
        """The tracking settings the controls ask for (raises on a bad entry)."""
        width = float(self.cut_bandwidth.value)
        return dict(samples_per_rev=int(self.samples_per_rev.value),
                    revs_per_block=float(self.revs_per_block.value), window=self.window.value,
                    protect=bool(self.protect.value), cut_orders=self._orders(),
                    cut_bandwidth_orders=width if width > 0 else None,
                    max_order=None, **self._speed_changes())

    def _sync(self) -> None:
        """Hand the controls' values to the pipeline; it drops only the stages they affect."""
        changes = self._settings_changes()
        if self.pipeline is None:
            self.pipeline = TrackingPipeline(
                self.run, TrackingSettings(**changes, **self._fixed), machine=self.machine,
                plan=self.plan, channels=self._tracked_channels(), keep_signal=True,
                progress=self._progress)
        else:
            self.pipeline.update(**changes)
            self.pipeline.set_channels(self._tracked_channels())

    def _progress(self, fraction: float) -> None:
        self.progress.value = int(round(fraction * self.progress.max))

    def _stage(self, stage: str):
        """A pipeline stage's result for the current controls (the progress bar follows the
        tracking pass)."""
        self._sync()
        tracking = "angle" not in self.pipeline._results and stage in ("angle", "spectra", "cuts",
                                                                          "identify")
        if tracking:
            self.progress.bar_style = ""
            self.progress.value = 0
        out = self.pipeline.result(stage)
        if tracking:
            self.progress.bar_style = "success"
        return out

    def _index(self) -> int:
        return self.pipeline.channel_names.index(self.channel.value)

    @property
    def runs(self):
        """How many times each stage ran (``collections.Counter``, see
        :class:`~workbench.runs.pipeline.TrackingPipeline`)."""
        return self.pipeline.runs

    def tacho(self):
        """Pulse times (s) and the shaft angle fitted through them (computed once per speed
        source); for the vibration or a speed channel, the estimate's time grid and its angle."""
        speed = self._stage("speed")
        self._estimate = speed.estimate
        if speed.estimate is not None:
            return speed.estimate.time_s, speed.angle
        return speed.pulses, speed.angle

    def track(self) -> AngleSignal:
        """The chosen channel tracked at the chosen samples per rev (kept until a setting of
        the speed or the tracking changes)."""
        stage = self._stage("angle")
        key = (stage, self.channel.value)
        if key not in self._signals:
            self._signals = {k: v for k, v in self._signals.items() if k[0] is stage}
            self._signals[key] = stage.signal(self.channel.value)
        return self._signals[key]

    def analysis(self):
        """Order map, order spectrum, its peaks and the identification of predicted lines."""
        sp = self._stage("spectra")
        ident = self._stage("identify")
        i = self._index()
        return sp.order_map[i], sp.spectrum[i], sp.peaks[i], ident.identification[i]

    def cuts(self):
        """Order cuts of the chosen orders from the current order map."""
        return list(self._stage("cuts").cuts[self._index()])

    @property
    def usable_max_order(self) -> float:
        """Highest order shown: samples per rev / ANALYSER_FACTOR (the analyser convention)."""
        return usable_max_order(int(self.samples_per_rev.value))

    def refresh(self):
        """Redo what the controls changed; redraw the figure on show."""
        notes = []
        try:
            with collect_warnings() as caught:
                pulses, angle = self.tacho()
                sig = self.track()
                omap, spec, peaks, ident = self.analysis()
                self.cuts()
            notes = caught.messages
        except FoldlineError as exc:
            self.status.value = STYLE + error_html(exc)
            self.error = exc
            return
        self.error = None
        self._draw_shown()
        unit = self._unit()
        self.header.value = STYLE + (
            f"<b>{html.escape(str(self.run.source or 'run'))}</b>: {self.run.n_channels} channels at "
            f"{self.run.rate_hz:g} Hz, {self.run.duration_s:.1f} s; {sig.revolutions:.0f} revolutions "
            f"tracked at {sig.samples_per_rev} samples per rev, order resolution "
            f"{omap.order_resolution:g}" + (f", channel unit {html.escape(unit)}" if unit else ""))
        est = self._estimate
        what = (f"{len(pulses)} pulses, {len(angle.doubted)} doubted" if est is None else
                f"speed from the {est.source}, uncertainty {100 * est.speed_uncertainty:.3g} % RMS")
        self.tacho_info.value = STYLE + (
            f'<div class="foldline-note">{html.escape(what)}; speed '
            f"{angle.rpm_min:.0f} to {angle.rpm_max:.0f} rpm</div>" + html_table(
                angle.doubted.to_frame().head(20).to_dict("records"),
                (("time_s", "time (s)"), ("reason", "why doubted")), css_class="foldline-doubted",
                formats={"time_s": ".4f"}, empty="No doubted pulse."))
        prows = [{"order": o, "amplitude": a, "prominence_db": p}
                 for o, a, p in zip(peaks.order, peaks.amplitude, peaks.prominence_db)]
        self.peaks.value = STYLE + "<b>Strongest peaks</b>" + html_table(
            prows, (("order", "order"), ("amplitude", f"amplitude, peak ({unit or 'channel unit'})"),
                    ("prominence_db", "prominence (dB)")),
            css_class="foldline-peaks", formats={"order": ".3f", "amplitude": ".4g", "prominence_db": ".1f"})
        self.aliases.value = STYLE + self._identified_html(ident)
        self.status.value = STYLE + "".join(f'<div class="foldline-note">{html.escape(m)}</div>' for m in notes)

    def _unit(self) -> str:
        for ch in self.run.channels:
            if ch.name == self.channel.value:
                return ch.unit
        return ""

    def valid_region(self):
        """What the run measures faithfully: the plan's filter's usable edge, or Nyquist."""
        return self._stage("identify").valid

    def unmatched(self):
        """Measured lines no predicted line explains (every measured line without a machine)."""
        return self._stage("identify").unmatched[self._index()]

    def _unmatched_html(self):
        table = self.unmatched()
        what = "match no predicted line" if self.lines else "were measured (no machine: nothing predicted)"
        return (f"<b>Measured lines that {what}</b>: {len(table)} (tags as on the order map)" + html_table(
            table.to_dict("records"),
            (("id", "tag"), ("family", "family"), ("moves_with_speed", "moves with speed"), ("order", "order"),
             ("hz", "Hz"), ("rpm_min", "from (rpm)"), ("rpm_max", "to (rpm)"), ("points", "points"),
             ("amplitude_max", "max amplitude")),
            css_class="foldline-unmatched",
            formats={"order": ".3f", "hz": ".1f", "rpm_min": ".0f", "rpm_max": ".0f", "points": "d",
                     "amplitude_max": ".3g"},
            empty="Every measured line is explained by a predicted line."))

    def _identified_html(self, ident):
        if ident is None:
            return ('<div class="foldline-note">No machine: nothing predicted to identify.</div>'
                    + self._unmatched_html())
        table = ident.table
        n_alias = int(table["alias"].sum()) if len(table) else 0
        head = (f"<b>Lines identified in the order map</b>: {len(table)} predicted lines found, "
                f"{n_alias} of them aliases (folded by the time sampling at {self.run.rate_hz:g} Hz); "
                f"{len(ident.unexplained)} ridge points unexplained")
        return head + html_table(
            table.to_dict("records"),
            (("line", "line"), ("kind", "kind"), ("zone", "zone"), ("alias", "alias"), ("points", "points"),
             ("rpm_min", "from (rpm)"), ("rpm_max", "to (rpm)"), ("order_min", "order from"),
             ("order_max", "order to"), ("amplitude_max", "max amplitude")),
            css_class="foldline-identified", changed=list(table["alias"]) if len(table) else None,
            formats={"zone": "d", "points": "d", "rpm_min": ".0f", "rpm_max": ".0f", "order_min": ".2f",
                     "order_max": ".2f", "amplitude_max": ".3g"},
            empty="No predicted line matched the order map's ridges.") + self._unmatched_html()

    # -- figures --------------------------------------------------------------------------
    def figure(self, which: str):
        """A new matplotlib Figure of ``which`` ("tacho", "map", "cuts" or "spectrum")."""
        unit = self._unit()
        if which == "tacho":
            pulses, angle = self.tacho()
            t = np.linspace(angle.t_start_s, angle.t_end_s, 1500)
            est = self._estimate
            band = speed_check_options(angle, t, estimate=est, source="tacho" if est is None else est.source)
            if est is None:
                band["pulse_times_s"] = pulses
            title = (f"Tacho check: {len(pulses)} pulses, {self.run.pulses_per_rev} per rev" if est is None
                     else f"Speed check: {est.method}")
            return plot_tacho_check(t, angle.rpm_at(t), doubted_times_s=angle.doubted.time_s,
                                    doubted_reasons=angle.doubted.reason, title=title, **band)
        omap, spec, peaks, ident = self.analysis()
        top = self.usable_max_order
        valid = self.valid_region()
        if which == "map":
            fig = plot_order_map(omap, lines=self.lines or None, rate_hz=self.run.rate_hz, identification=ident,
                                 max_order=top, unit=unit, overlay=self.overlay.value,
                                 unmatched=self.unmatched(), valid=valid,
                                 title=f"Order map at {self.run.rate_hz:g} S/s")
            self._mark_cut_orders(fig)
            return fig
        if which == "cuts":
            return plot_order_cuts(self.cuts(), unit=unit, valid=valid)
        if which == "spectrum":
            table = pd.DataFrame({"order": peaks.order, "amplitude": peaks.amplitude})
            return plot_order_spectrum(spec, peaks=table, lines=self.lines or None, unit=unit, max_order=top,
                                       overlay=self.overlay.value, identification=ident, valid=valid,
                                       rpm_range=(float(np.nanmin(omap.rpm)), float(np.nanmax(omap.rpm))))
        raise InputError(f"figure {which!r}: choose one of {', '.join(self.FIGURES)}")

    def _mark_cut_orders(self, fig):
        """The orders cut, marked on the order map (links the map to the cuts beside it)."""
        try:
            orders = self._orders()
        except FoldlineError:  # a bad entry is reported by the cuts; the map stays plain
            return
        ax = fig.axes[0]
        for o in orders:
            ax.axhline(o, color="white", lw=0.8, ls=":", alpha=0.9)
            ax.annotate(f"cut {o:g}", (1.0, o), xycoords=("axes fraction", "data"),
                        xytext=(-4, 2), textcoords="offset points", ha="right", va="bottom",
                        color="white", fontsize=7)

    #: Figures on each tab (the results tab shows the map, the cuts and the spectrum together).
    _TAB_FIGURES = (("tacho",), ("map", "cuts", "spectrum"))

    def _figure_key(self, which):
        """What a figure depends on: it is redrawn only when this changes (a stage's run count
        tells its result apart from the one before)."""
        runs = self.pipeline.runs if self.pipeline is not None else {}
        if which == "tacho":
            return (runs.get("speed"),)
        key = (self.channel.value,) + tuple(runs.get(s) for s in STAGES)
        if which == "cuts":
            return key
        return key + (self.overlay.value,)

    def _draw(self, which):
        fig = self.figure(which)
        getattr(self, f"{which}_figure").value = figure_bytes(fig, dpi=_DPI)
        self._drawn[which] = self._figure_key(which)

    def _draw_shown(self):
        index = self.tabs.selected_index or 0
        if index >= len(self._TAB_FIGURES):
            self._draw_extraction()
            return
        for which in self._TAB_FIGURES[index]:
            if self._drawn.get(which) != self._figure_key(which):
                try:
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore", FoldlineWarning)
                        self._draw(which)
                except FoldlineError as exc:
                    self.status.value = STYLE + error_html(exc)

    # -- export ---------------------------------------------------------------------------
    def tables(self) -> dict:
        """The panel's results as tables: name -> pandas.DataFrame."""
        pulses, angle = self.tacho()
        omap, spec, peaks, ident = self.analysis()
        cuts = self.cuts()
        out = {
            "speed": pd.DataFrame({"time_s": pulses, "rpm": angle.rpm_at(pulses)}),
            "doubted_pulses": angle.doubted.to_frame(),
            "order_spectrum": pd.DataFrame({"order": spec.order, "amplitude": spec.amplitude}),
            "order_peaks": pd.DataFrame({"order": peaks.order, "amplitude": peaks.amplitude,
                                         "prominence_db": peaks.prominence_db}),
            "order_cuts": pd.DataFrame({"rpm": omap.rpm, **{f"order {c.order:g}": c.amplitude for c in cuts}}),
        }
        if ident is not None:
            out["identified_lines"] = ident.table
        out["unmatched_lines"] = self.unmatched()
        return out

    _FIGURE_FILES = {"tacho": "tacho_check.png", "map": "order_map.png", "cuts": "order_cuts.png",
                     "spectrum": "order_spectrum.png"}

    def export(self, what="tables", folder=None) -> list:
        """Write the tables (CSV) or the figures (PNG) to ``folder`` (default: the folder box).

        Returns the paths written.  Unless ``overwrite`` is ticked, nothing is written when any
        of the files exists already (the status says which).
        """
        folder = Path(self.folder.value if folder is None else folder).expanduser()
        force = bool(self.overwrite.value)
        written = []
        try:
            if what == "tables":
                items = [(folder / f"{name}.csv", table) for name, table in self.tables().items()]
            elif what == "figures":
                self.cuts()  # a bad entry stops the export before any file is written
                items = [(folder / self._FIGURE_FILES[w], w) for w in self.FIGURES]
            else:
                raise InputError(f"export {what!r}: choose 'tables' or 'figures'")
            self._prepare_folder(folder, [p for p, _ in items], force)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", FoldlineWarning)
                for path, item in items:
                    if what == "tables":
                        with atomic_output(path, force=force) as tmp:
                            item.to_csv(tmp, index=False)
                        written.append(path)
                    else:
                        written.append(save_figure(self.figure(item), path, force=force))
        except (FoldlineError, OSError) as exc:
            return self._exported(what, written, exc)
        return self._exported(what, written)

    @staticmethod
    def _prepare_folder(folder: Path, paths, force: bool) -> None:
        """Refuse, before anything is written, when a file exists already (unless ``force``);
        then create ``folder``."""
        existing = [p.name for p in paths if p.exists()]
        if existing and not force:
            raise OutputExistsError(f"{folder}: {', '.join(existing)} exist(s) already; nothing "
                                    "written. Tick 'overwrite files' or choose another folder")
        folder.mkdir(parents=True, exist_ok=True)

    def _exported(self, what, written, exc=None) -> list:
        """Show what an export wrote (and why it stopped, on ``exc``); return the paths."""
        self.error = exc
        if exc is None:
            self.status.value = STYLE + self._written_html(written)
        else:
            self.status.value = (STYLE + self._not_exported_html(what, written) + error_html(exc)
                                 + self._written_html(written))
        return written

    @staticmethod
    def _written_html(paths) -> str:
        if not paths:
            return ""
        items = "".join(f"<li>{html.escape(str(p))}</li>" for p in paths)
        return f'<div class="foldline-note">written:<ul class="foldline-written">{items}</ul></div>'

    # -- order extraction (Vold-Kalman filter) ---------------------------------------------
    #: Longest waveform handed to the player (samples); the WAV export holds the whole run.
    MAX_PLAY_SAMPLES = 1 << 22

    def _build_extraction(self):
        """The extraction tab: orders, bandwidth (Hz or % of the order), filter order, player."""
        style, wide = {"description_width": "110px"}, widgets.Layout(width="300px")
        default = ", ".join(f"{o:g}" for o in self.default_cut_orders()[:2])
        self.extract_orders = widgets.Text(value=default, description="orders", style=style, layout=wide,
                                           continuous_update=False)
        self.extract_bandwidth = widgets.BoundedFloatText(value=2.0, min=1e-3, max=1e6, step=0.5,
                                                          description="-3 dB bandwidth", style=style,
                                                          layout=wide)
        self.extract_unit = widgets.ToggleButtons(options=(("Hz", "hz"), ("% of order", "pct")), value="hz",
                                                  style={"button_width": "90px"})
        self.extract_filter_order = widgets.Dropdown(options=(1, 2, 3), value=2, description="filter order",
                                                     style=style, layout=wide)
        self.extract_play = widgets.Dropdown(options=(), description="play order", style=style, layout=wide)
        self.export_waveform = widgets.Button(description="export waveforms (WAV)", icon="music")
        self.extract_audio = widgets.Audio(format="wav", autoplay=False, loop=False)
        self.extract_figure = widgets.Image(format="png", layout=widgets.Layout(max_width="100%"))
        self.extract_figure.add_class("foldline-figure")
        self.extract_info = widgets.HTML()
        self._extractions = Cache(4)
        box = widgets.VBox([
            widgets.HBox([widgets.VBox([self.extract_orders, self.extract_bandwidth, self.extract_unit]),
                          widgets.VBox([self.extract_filter_order, self.extract_play, self.export_waveform])]),
            self.extract_figure, self.extract_audio, self.extract_info])
        self.tabs.children = tuple(self.tabs.children) + (box,)
        self.tabs.set_title(len(self.tabs.children) - 1, "order extraction")
        for control in (self.extract_orders, self.extract_bandwidth, self.extract_unit, self.extract_filter_order):
            control.observe(lambda change: self._draw_shown(), names="value")
        self.extract_play.observe(lambda change: self._update_player(), names="value")
        self.export_waveform.on_click(lambda _b: self.export_waveforms())

    def _extraction_key(self):
        return (self.channel.value, self.extract_orders.value, float(self.extract_bandwidth.value),
                self.extract_unit.value, int(self.extract_filter_order.value))

    def extraction(self):
        """The chosen orders of the chosen channel extracted together (Vold-Kalman filter, cached)."""
        from workbench.angle import extract_orders

        key = self._extraction_key()

        def make():
            orders = parse_orders(self.extract_orders.value, "orders to extract", "4, 4.1")
            _, angle = self.tacho()
            bw = {"hz": {"bandwidth_hz": key[2]}, "pct": {"bandwidth_pct": key[2]}}[key[3]]
            return extract_orders(self.run.channel(key[0]), self.run.rate_hz, angle, orders,
                                  filter_order=key[4], **bw)

        return self._extractions.get(key, make)

    def _draw_extraction(self):
        key = self._extraction_key()
        if self._drawn.get("extraction") == key:
            return
        try:
            with collect_warnings() as caught:
                ex = self.extraction()
            fig = plot_order_envelopes(ex, unit=self._unit())
        except FoldlineError as exc:
            self.status.value = STYLE + error_html(exc)
            self.error = exc
            return
        self.error = None
        self.extract_figure.value = figure_bytes(fig, dpi=_DPI)
        self._drawn["extraction"] = key
        labels = [(f"order {o:g}", o) for o in ex.orders]
        if tuple(tuple(o) for o in self.extract_play.options) != tuple(labels):
            self.extract_play.options = labels
        if self.extract_play.value not in ex.orders:
            self.extract_play.value = ex.orders[0]      # the player follows (observer)
        else:
            self._update_player()
        bw = ex.bandwidth_hz
        self.extract_info.value = STYLE + (
            f'<div class="foldline-note">Vold-Kalman filter, orders extracted together; -3 dB bandwidth '
            f"{bw.min():.3g}" + (f" to {bw.max():.3g}" if np.ptp(bw) else "") + f" Hz, filter order "
            f"{ex.filter_order}; envelopes at {ex.envelope_rate_hz:g} Hz. {html.escape(self._player_note)}</div>"
            + "".join(f'<div class="foldline-note">{html.escape(m)}</div>' for m in caught.messages))

    _player_note = ""

    def _update_player(self):
        """Hand the chosen order's waveform (normalised, 16-bit) to the player."""
        if self.extract_play.value is None or "extraction" not in self._drawn:
            return
        import io

        from scipy.io import wavfile

        ex = self.extraction()
        wave = ex.waveform(self.extract_play.value)[: self.MAX_PLAY_SAMPLES]
        peak = float(np.max(np.abs(wave))) or 1.0
        rate = int(round(self.run.rate_hz))
        speed = max(1, math.ceil(8000 / rate))   # browsers play WAV from 8 kHz up
        buf = io.BytesIO()
        wavfile.write(buf, rate * speed, np.round(wave / peak * 32000).astype(np.int16))
        self.extract_audio.value = buf.getvalue()
        notes = ["player: normalised to its peak"]
        if speed > 1:
            notes.append(f"played {speed} x faster (the run's rate {rate} Hz is below what browsers play)")
        if len(wave) < ex.n_samples:
            notes.append(f"first {len(wave) / self.run.rate_hz:.0f} s only (the WAV export holds the whole run)")
        self._player_note = "; ".join(notes) + "."

    def export_waveforms(self, folder=None) -> list:
        """Write every extracted order's waveform (``order_<k>.wav``, float32, the run's rate and
        length) and envelope (``order_<k>.csv``) to ``folder`` (default: the folder box)."""
        from workbench.runs.extraction import order_files, write_order_envelope, write_order_waveform

        folder = Path(self.folder.value if folder is None else folder).expanduser()
        force = bool(self.overwrite.value)
        written = []
        try:
            ex = self.extraction()
            self._prepare_folder(folder, order_files(ex.orders, folder), force)
            for o in ex.orders:
                written.append(write_order_waveform(ex, o, folder, force=force))
                written.append(write_order_envelope(ex, o, folder, force=force))
        except (FoldlineError, OSError) as exc:
            return self._exported("waveforms", written, exc)
        return self._exported("waveforms", written)

    @staticmethod
    def _not_exported_html(what, written) -> str:
        done = f"{len(written)} file(s) written before it stopped" if written else "nothing written"
        return (f'<div class="foldline-error"><b>{html.escape(what)} not exported ({done})</b>'
                "</div>")

    # -- display --------------------------------------------------------------------------
    def show(self):
        """Display the panel in the notebook."""
        from IPython.display import display

        display(self.widget)

    def _ipython_display_(self):
        self.show()
