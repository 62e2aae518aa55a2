"""Fold map panel: pick a rate, a filter, a speed range and a threshold; see what folds where.

The panel shows the fold map figure, the collision table and the advisor's verdict, and keeps
the three in step with its controls.  Every control is an attribute, so code (and tests) can
drive the panel exactly as a person does::

    panel = FoldMapPanel("machine.toml", "plan.toml")
    panel.rate_choice.value = 2560.0        # the candidate rates of the plan
    panel.rate_hz.value = 3000.0            # or any rate
    panel.view.value = "order"
    panel.sources.value = ("stage 1",)      # show only these entries
    with panel.hold():                      # several controls, one update
        panel.filter_kind.value = "elliptic"
        panel.filter_order.value = 8

Work is cached: a fold map per (rate, filter, speed range), a collision table per (rate, filter,
speed range, threshold), the advice per (filter, speed range, threshold) and a picture per
(rate, filter, speed range, threshold, view, bands).  Showing or hiding a source only redraws
the line artists of the cached picture (see :class:`workbench.ui.scene.FoldScene`).
"""

from __future__ import annotations

import contextlib
import dataclasses
import html
import math

import ipywidgets as widgets

from workbench import checks
from workbench.errors import FoldlineError, InputError
from workbench.plots.foldmap import draw_low_frequency
from workbench.sampling import (ANALOG_KINDS, COLLISION_COLUMNS, FILTER_KINDS, AntiAliasFilter,
                                SpeedProfile, advise, find_collisions, fold_map)
from workbench.ui._common import (FIGSIZE_IN, STYLE, Cache, agg_figure, as_machine, as_plan,
                                  collect_warnings, collision_columns, collision_formats,
                                  error_html, fmt_rate, html_table, png_bytes, step_card)
from workbench.ui.scene import FoldScene

__all__ = ["FoldMapPanel", "narrowed_speed", "COLLISION_TABLE_COLUMNS"]

#: Columns of the panel's collision table: (key of find_collisions' table, heading with units);
#: the command's columns with the true frequencies before the apparent ones.
COLLISION_TABLE_COLUMNS = collision_columns(
    COLLISION_COLUMNS[:5] + ("true_hz_min", "true_hz_max") + COLLISION_COLUMNS[5:])

_ENTRY_KINDS = {"shaft": "shaft", "gear_stage": "gear stage", "planetary_stage": "planetary stage",
                "bearing": "bearing", "rotor": "rotor", "order": "order", "line": "fixed line"}
_FILTER_LABELS = {"none": "none", "ideal": "ideal (brick wall)", "butterworth": "Butterworth",
                  "bessel": "Bessel", "chebyshev1": "Chebyshev type I", "elliptic": "elliptic",
                  "digital": "digital (delta-sigma)", "table": "table (from the plan)"}


def narrowed_speed(speed: SpeedProfile, rpm_lo: float, rpm_hi: float) -> SpeedProfile:
    """The speed profile limited to ``rpm_lo``..``rpm_hi`` rpm, at the profile's fastest sweep.

    Parameters
    ----------
    speed : SpeedProfile
        The plan's profile.
    rpm_lo, rpm_hi : float
        Speed range to keep, rpm, ``0 <= rpm_lo < rpm_hi``.

    Returns
    -------
    SpeedProfile
        ``speed`` itself when the range is the profile's own; otherwise a linear profile over
        the range in the profile's direction (run-up or coast-down), lasting as long as the
        range takes at the profile's fastest sweep rate (so the advisor's smearing estimate is
        unchanged).
    """
    lo, hi = float(rpm_lo), float(rpm_hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo < 0 or not lo < hi:
        raise InputError(f"speed range {lo:g} to {hi:g} rpm: choose 0 <= low < high")
    if lo == speed.rpm_min and hi == speed.rpm_max:
        return speed
    sweep = float(speed.max_sweep_rate_rpm_per_s)
    duration = (hi - lo) / sweep if sweep > 0 else float(speed.duration_s)
    start, end = (hi, lo) if speed.start_rpm > speed.end_rpm else (lo, hi)
    return SpeedProfile("linear", start_rpm=start, end_rpm=end, duration_s=duration)


def _on_grid(x: float, step: float) -> bool:
    return abs(x / step - round(x / step)) < 1e-9


def _nice_ceiling(x: float) -> float:
    """A round number at or above ``x`` (1, 2 or 5 times a power of ten, times 10)."""
    if x <= 0:
        return 100.0
    step = 10 ** math.floor(math.log10(x))
    for m in (1, 2, 2.5, 5, 10):
        if m * step >= x:
            return m * step
    return 10 * step


class FoldMapPanel:
    """Interactive fold map of one machine and plan.

    Parameters
    ----------
    machine : Machine or path
        The drive train (or its machine file).
    plan : Plan or path
        The test plan (or its plan file).
    rate_hz : float, optional
        Rate shown first (default: the advisor's recommendation, else the first candidate).
    n_speeds : int, optional
        Speed grid of the fold maps (default 2000, the advisor's).

    Attributes
    ----------
    rate_choice : ipywidgets.Dropdown
        The plan's candidate rates, Hz (None when ``rate_hz`` holds another rate).
    rate_hz : ipywidgets.FloatText
        The rate in use, Hz; any positive value.
    filter_kind : ipywidgets.Dropdown
        Anti-alias filter model (see :data:`workbench.sampling.FILTER_KINDS`).
    filter_order : ipywidgets.BoundedIntText
        Filter order (analog kinds).
    cutoff : ipywidgets.BoundedFloatText
        Filter cutoff as a fraction of the rate (analog kinds and ideal).
    speed_range : ipywidgets.FloatRangeSlider
        Reference shaft speeds mapped, rpm.
    threshold_db : ipywidgets.FloatSlider
        Residual above which a folded line in a band is a collision, dB.
    sources : ipywidgets.SelectMultiple
        Machine entries whose lines are drawn and listed.
    bands : ipywidgets.SelectMultiple
        Bands drawn and listed.
    view : ipywidgets.ToggleButtons
        ``"hz"`` (apparent frequency) or ``"order"`` (apparent order).
    inset_hz : ipywidgets.BoundedFloatText
        Top of the low-frequency region shown enlarged below the map, Hz (0: none); see
        :func:`workbench.plots.foldmap.draw_low_frequency`.
    figure : ipywidgets.Image
        The fold map, PNG.
    inset_figure : ipywidgets.Image
        The low-frequency region enlarged, PNG (class ``foldline-inset-figure``; hidden
        while ``inset_hz`` is 0).
    table : ipywidgets.HTML
        Collisions of the shown sources with the shown bands (class ``foldline-collisions``)
        and, folded away, the direct lines inside bands (class ``foldline-overlaps``).
    verdict : ipywidgets.HTML
        The advisor's verdict on the rate in use and its recommendation (class
        ``foldline-verdict``).
    widget : ipywidgets.VBox
        The whole panel.
    """

    def __init__(self, machine, plan, *, rate_hz=None, n_speeds=2000):
        self.machine = as_machine(machine)
        self.plan = as_plan(plan)
        self.lines = self.machine.lines()
        self.plan.check_against(self.lines)
        self.n_speeds = int(n_speeds)
        self._fmaps = Cache(16)
        self._tables = Cache(32)
        self._advice = Cache(8)
        self._scenes = Cache(12)
        self._insets = Cache(8)
        self._build_controls(rate_hz)
        self._defaults = {c: c.value for c in self._controls()}
        self._build_layout()
        self._quiet = False
        self.refresh()
        for control in self._controls():
            if control is not self.rate_choice:
                control.observe(self._on_change, names="value")
        self.rate_choice.observe(self._on_rate_choice, names="value")

    def _controls(self):
        return (self.rate_choice, self.rate_hz, self.filter_kind, self.filter_order, self.cutoff,
                self.speed_range, self.threshold_db, self.sources, self.bands, self.view, self.inset_hz)

    @contextlib.contextmanager
    def hold(self):
        """Change several controls inside a ``with panel.hold():`` block; update once at its end."""
        self._quiet = True
        try:
            yield self
        finally:
            self._quiet = False
            self._sync_filter_fields()
            self.refresh()

    def reset(self):
        """Put every control back to the value it opened with, then redraw once."""
        with self.hold():
            for control, value in self._defaults.items():
                control.value = value

    # -- controls -------------------------------------------------------------------------
    def _build_controls(self, rate_hz):
        plan, style = self.plan, {"description_width": "118px"}
        wide = widgets.Layout(width="98%")
        with collect_warnings():
            advice = self._advice_for(plan)
        recommended = advice.recommended_rate_hz
        options = []
        for rate in sorted(plan.rates_hz):
            label = fmt_rate(rate) + ("  (recommended)" if rate == recommended else "")
            options.append((label, float(rate)))
        if rate_hz is None:
            rate_hz = recommended if recommended is not None else float(sorted(plan.rates_hz)[0])
        rate_hz = float(rate_hz)
        self.rate_choice = widgets.Dropdown(options=options, value=rate_hz if rate_hz in plan.rates_hz else None,
                                            description="plan's rates", style=style, layout=wide)
        self.rate_choice.add_class("foldline-rate-choice")
        self.rate_hz = widgets.FloatText(value=rate_hz, description="rate in use (Hz)", style=style,
                                         layout=wide)
        filt = plan.filter
        kinds = [k for k in FILTER_KINDS if k != "table" or filt.kind == "table"]
        self.filter_kind = widgets.Dropdown(options=[(_FILTER_LABELS[k], k) for k in kinds], value=filt.kind,
                                            description="anti-alias filter", style=style, layout=wide)
        self.filter_order = widgets.BoundedIntText(value=filt.order or 6, min=1, max=32,
                                                   description="filter order", style=style, layout=wide)
        self.cutoff = widgets.BoundedFloatText(value=filt.cutoff or 0.4, min=0.01, max=0.99, step=0.01,
                                               description="cutoff (x rate)", style=style, layout=wide)
        lo, hi = float(plan.speed.rpm_min), float(plan.speed.rpm_max)
        top = _nice_ceiling(1.25 * hi)
        # A step that the plan's own speeds lie on, so the slider never moves them by itself.
        step = next((s for s in (10.0, 5.0, 1.0, 0.5) if _on_grid(lo, s) and _on_grid(hi, s)), 0.1)
        self.speed_range = widgets.FloatRangeSlider(value=(lo, hi), min=0.0, max=max(top, hi), step=step,
                                                    description="speed (rpm)", readout_format=".0f",
                                                    continuous_update=False, style=style, layout=wide)
        self.speed_range.add_class("foldline-speed-range")
        thr = float(plan.threshold_db)
        self.threshold_db = widgets.FloatSlider(value=thr, min=min(-160.0, thr), max=max(20.0, thr), step=1.0,
                                                description="threshold (dB)", readout_format=".0f",
                                                continuous_update=False, style=style, layout=wide)
        self.threshold_db.add_class("foldline-threshold")
        entries = list(dict.fromkeys(ln.entry for ln in self.lines))
        count = {e: sum(1 for ln in self.lines if ln.entry == e) for e in entries}
        table_of = {name: getattr(item, "table", "") for name, item in self.machine.entries.items()}
        labels = [f"{e}  ({_ENTRY_KINDS.get(table_of.get(e), 'entry')}, {count[e]} "
                  f"line{'s' if count[e] != 1 else ''})" for e in entries]
        self.sources = widgets.SelectMultiple(
            options=list(zip(labels, entries)),
            value=tuple(entries), rows=min(7, max(2, len(entries))), description="sources shown",
            style=style, layout=wide)
        self.bands = widgets.SelectMultiple(
            options=[b.name for b in plan.bands], value=tuple(b.name for b in plan.bands),
            rows=min(4, max(1, len(plan.bands))), description="bands shown", style=style, layout=wide)
        self.view = widgets.ToggleButtons(options=[("Hz", "hz"), ("orders", "order")], value="hz",
                                          description="vertical axis", style={**style, "button_width": "90px"})
        self.inset_hz = widgets.BoundedFloatText(value=0.0, min=0.0, max=1e6, step=10.0,
                                                 description="enlarge 0 to (Hz)", style=style,
                                                 tooltip="the low-frequency region enlarged below the map; 0: none")
        self.inset_hz.add_class("foldline-inset-hz")
        self._sync_filter_fields()

    def _build_layout(self):
        self.header = widgets.HTML()
        self.figure = widgets.Image(format="png", layout=widgets.Layout(max_width="100%"))
        self.figure.add_class("foldline-figure")
        self.inset_figure = widgets.Image(format="png", layout=widgets.Layout(max_width="100%", display="none"))
        self.inset_figure.add_class("foldline-inset-figure")
        self.table = widgets.HTML()
        self.table.add_class("foldline-table-box")
        self.legend = widgets.HTML()
        self.legend.add_class("foldline-legend-box")
        self.verdict = widgets.HTML()
        self.verdict.add_class("foldline-verdict-box")
        hint = widgets.HTML('<span class="foldline-note">Ctrl/Shift-click to pick several '
                            'sources or bands.</span>')
        # The planner's steps from left to right, each a card with its controls inline: how the
        # run is acquired (rate, anti-alias filter), what the test does (speed range, what
        # counts), what to look at; the fold map, its verdict and the table follow below.
        steps = widgets.HBox([
            step_card("1 &middot; acquisition", [self.rate_choice, self.rate_hz, self.filter_kind,
                                             self.filter_order, self.cutoff]),
            step_card("2 &middot; test", [self.speed_range, self.threshold_db]),
            step_card("3 &middot; what to show", [self.sources, self.bands, hint, self.view,
                                                   self.inset_hz]),
        ], layout=widgets.Layout(flex_flow="row wrap", align_items="stretch", width="100%"))
        steps.add_class("foldline-steps")
        body = widgets.VBox([steps, self.verdict, self.figure, self.inset_figure, self.legend])
        self.widget = widgets.VBox([self.header, body, self.table])
        self.widget.add_class("foldline-foldmap-panel")

    def _sync_filter_fields(self):
        kind = self.filter_kind.value
        self.filter_order.disabled = kind not in ANALOG_KINDS
        self.cutoff.disabled = kind not in ANALOG_KINDS + ("ideal",)

    def _on_rate_choice(self, change):
        if change["new"] is not None:
            self.rate_hz.value = float(change["new"])

    def _on_change(self, change):
        if change["owner"] is self.rate_hz:
            rate = float(change["new"])
            self.rate_choice.value = rate if rate in self.plan.rates_hz else None
        if self._quiet:
            return
        if change["owner"] is self.filter_kind:
            self._sync_filter_fields()
        self.refresh()

    # -- computation ----------------------------------------------------------------------
    def current_filter(self) -> AntiAliasFilter:
        """The anti-alias filter the controls describe."""
        base, kind = self.plan.filter, self.filter_kind.value
        fields = {}
        if kind in ANALOG_KINDS:
            fields = {"order": int(self.filter_order.value), "cutoff": float(self.cutoff.value)}
        elif kind == "ideal":
            fields = {"cutoff": float(self.cutoff.value)}
        if kind == base.kind:
            return dataclasses.replace(base, **fields)
        return AntiAliasFilter(kind, passband_edge=base.passband_edge, stopband_edge=base.stopband_edge,
                               stopband_db=base.stopband_db, passband_ripple_db=base.passband_ripple_db,
                               **fields)

    def current_plan(self):
        """The plan the controls describe: the plan's bands with the chosen filter, threshold
        and speed range."""
        lo, hi = self.speed_range.value
        return dataclasses.replace(
            self.plan,
            filter=self.current_filter(),
            threshold_db=float(self.threshold_db.value),
            speed=narrowed_speed(self.plan.speed, lo, hi),
        )

    def _advice_for(self, plan):
        key = (plan.filter, plan.speed, plan.threshold_db)

        def make():
            advice = advise(self.lines, plan, n_speeds=self.n_speeds)
            for rate, table in advice.collisions.items():  # the advisor's tables are reused
                self._tables.put((rate,) + key, table)
            return advice

        return self._advice.get(key, make)

    def _fold_map_for(self, plan, rate):
        key = (rate, plan.filter, plan.speed)
        return self._fmaps.get(key, lambda: fold_map(self.lines, plan, rate, n_speeds=self.n_speeds))

    def _table_for(self, plan, rate, fmap):
        key = (rate, plan.filter, plan.speed, plan.threshold_db)
        return self._tables.get(key, lambda: find_collisions(self.lines, plan, rate, fmap=fmap))

    def _scene_for(self, plan, rate, fmap, table, view, bands):
        key = (rate, plan.filter, plan.speed, plan.threshold_db, view, bands)

        def make():
            return FoldScene(fmap, plan, table, view=view, bands=set(bands), labels=False)

        return self._scenes.get(key, make)

    def _inset_for(self, plan, rate, fmap, table, view, bands, visible, top_hz):
        key = (rate, plan.filter, plan.speed, plan.threshold_db, view, bands, visible, top_hz)

        def make():
            fig = agg_figure(figsize=(FIGSIZE_IN[0], 0.7 * FIGSIZE_IN[1]))
            fig.subplots_adjust(left=0.075, right=0.985, bottom=0.16, top=0.9)
            draw_low_frequency(fig.add_subplot(), fmap, plan, top_hz, collisions=table, view=view,
                               lines=visible, bands=set(bands))
            fig.canvas.draw()
            return png_bytes(fig)

        return self._insets.get(key, make)

    def visible_lines(self) -> frozenset:
        """Names of the lines of the sources now shown."""
        shown = set(self.sources.value)
        return frozenset(ln.name for ln in self.lines if ln.entry in shown)

    def refresh(self):
        """Recompute what the controls changed and update figure, table and verdict."""
        with collect_warnings() as caught:
            try:
                plan = self.current_plan()
                rate = checks.rate_hz(None, "rate_hz", self.rate_hz.value)
                advice = self._advice_for(plan)
                fmap = self._fold_map_for(plan, rate)
                table = self._table_for(plan, rate, fmap)
                bands = frozenset(self.bands.value)
                scene = self._scene_for(plan, rate, fmap, table, self.view.value, bands)
                png = scene.png(self.visible_lines())
                top_hz = float(self.inset_hz.value or 0.0)
                inset = None if top_hz <= 0 else self._inset_for(plan, rate, fmap, table, self.view.value, bands,
                                                                 self.visible_lines(), top_hz)
            except FoldlineError as exc:
                self.verdict.value = STYLE + error_html(exc)
                self.error = exc
                return
        self.error = None
        self.fold_map, self.collisions, self.advice = fmap, table, advice
        self.figure.value = png
        if inset is not None:
            self.inset_figure.value = inset
        self.inset_figure.layout.display = "none" if inset is None else ""
        self.legend.value = scene.legend_html
        self.table.value = self._table_html(table, bands)
        self.verdict.value = self._verdict_html(plan, rate, table, advice, caught.messages)
        n = int((table["kind"] == "collision").sum())
        self.header.value = STYLE + (
            f'<b>{html.escape(self.machine.name)}</b>: fold map at {fmt_rate(rate)} '
            f'(Nyquist {fmap.nyquist_hz:g} Hz), {html.escape(fmap.filter_label)}, '
            f'{plan.speed.rpm_min:.0f}-{plan.speed.rpm_max:.0f} rpm: {n} collision(s)')

    # -- HTML -----------------------------------------------------------------------------
    def shown_collisions(self):
        """The current collision table restricted to the shown sources and bands."""
        table = self.collisions
        keep = table["line"].isin(self.visible_lines()) & table["band"].isin(set(self.bands.value))
        return table[keep]

    def _table_html(self, table, bands):
        shown = table["line"].isin(self.visible_lines()) & table["band"].isin(bands)
        coll = table[shown & (table["kind"] == "collision")]
        over = table[shown & (table["kind"] == "overlap")]
        hidden = int(((table["kind"] == "collision") & ~shown).sum())
        head = (f"<b>Collisions</b> (folded lines above {self.threshold_db.value:g} dB inside a band): "
                f"{len(coll)} shown" + (f", {hidden} more in hidden sources or bands" if hidden else ""))
        body = html_table(coll.to_dict("records"), COLLISION_TABLE_COLUMNS, css_class="foldline-collisions",
                          formats=collision_formats(), empty="No folded line enters a shown band above the threshold.")
        overlaps = html_table(over.to_dict("records"), COLLISION_TABLE_COLUMNS, css_class="foldline-overlaps",
                              formats=collision_formats(), empty="none")
        return (STYLE + f"<div>{head}</div>{body}<details><summary>Direct lines inside bands "
                f"(overlaps, not folded): {len(over)}</summary>{overlaps}</details>")

    def _verdict_html(self, plan, rate, table, advice, messages):
        coll = table[table["kind"] == "collision"]
        s = advice.resampling
        top_hz = s.max_order * s.top_speed_rpm / 60.0
        edge = plan.filter.usable_edge_hz(rate)
        captures = edge >= top_hz
        items = []
        # "clean" means no collision, as in the command, the advisor and the report; whether
        # the rate captures the highest order is said apart.
        if len(coll) == 0:
            head = f'<span class="foldline-ok">{fmt_rate(rate)} is clean (no collision)</span>'
        else:
            head = (f'<span class="foldline-bad">{fmt_rate(rate)} is not clean: {len(coll)} '
                    "collision(s)</span>")
        head += ("; " + ('<span class="foldline-ok">captures the highest order</span>' if captures
                         else '<span class="foldline-bad">does not capture the highest order</span>'))
        if len(coll):
            first = coll.iloc[0]
            items.append(f"{len(coll)} collision(s); worst: {html.escape(first['line'])} folds into "
                         f"{html.escape(first['band'])} at {first['rpm_min']:.0f}-{first['rpm_max']:.0f} rpm, "
                         f"residual {first['residual_db']:.1f} dB")
        else:
            items.append(f"no folded line above {plan.threshold_db:g} dB enters a band")
        items.append(f"order {s.max_order:g} at {s.top_speed_rpm:g} rpm ({top_hz:.0f} Hz) "
                     + ("lies inside" if captures else "lies beyond")
                     + f" the filter's usable band ({edge:.0f} Hz)")
        rec = advice.recommended_rate_hz
        rec_text = (f"<b>recommended rate: {fmt_rate(rec)}</b>" if rec is not None
                    else '<b class="foldline-bad">no rate is both clean and captures the highest '
                         "order</b>")
        if plan.filter.kind == "none":
            from workbench.sampling.guards import NO_FILTER_NOTE

            items.append(html.escape(NO_FILTER_NOTE))
        notes = "".join(f"<li>{html.escape(n)}</li>" for n in advice.notes)
        warn = "".join(f"<li>{html.escape(m)}</li>" for m in messages)
        return (STYLE + '<div class="foldline-verdict">' + head + "<ul>"
                + "".join(f"<li>{i}</li>" for i in items) + "</ul>" + rec_text
                + f" &mdash; angle domain: {s.samples_per_rev} samples per rev, "
                  f"{s.revs_per_block} revs per block ({s.order_resolution:g} order resolution), "
                  f"rate at least {s.min_rate_hz:.0f} Hz"
                + f'<details><summary>advisor notes</summary><ul class="foldline-note">{notes}</ul></details>'
                + (f'<ul class="foldline-note">{warn}</ul>' if warn else "") + "</div>")

    # -- display --------------------------------------------------------------------------
    def show(self):
        """Display the panel in the notebook."""
        from IPython.display import display

        display(self.widget)

    def _ipython_display_(self):
        self.show()
