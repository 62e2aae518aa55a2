"""Source editor panel: change a tooth count, a bearing's geometry or a rotor's count and see
the lines and the collisions move ("what if we used a 23-tooth pinion?").

The panel keeps the machine as it was opened and an edited copy; every edit replaces one
frozen source with :func:`dataclasses.replace`, rebuilds the machine (so the train is checked
again) and compares the two at the chosen rate: the edited entry's lines before and after, the
number of collisions, the worst residual and the advisor's recommended rate.
"""

from __future__ import annotations

import dataclasses
import html
import math

import ipywidgets as widgets

from workbench.errors import FoldlineError, InputError
from workbench.machine import Bearing, GearStage, PlanetaryStage, Rotor
from workbench.sampling import advise, find_collisions, fold_map
from workbench.ui._common import (STYLE, Cache, as_machine, as_plan, collect_warnings,
                                  collision_columns, collision_formats, error_html, fmt_rate,
                                  html_table)
from workbench.ui.scene import FoldScene

__all__ = ["SourceEditorPanel", "EDITABLE_FIELDS"]

#: Fields the editor offers for each source type: (field, label with units, integer?).
EDITABLE_FIELDS = {
    GearStage: (("driver_teeth", "driver teeth", True), ("driven_teeth", "driven teeth", True)),
    PlanetaryStage: (("sun_teeth", "sun teeth", True), ("planet_teeth", "planet teeth", True),
                     ("ring_teeth", "ring teeth", True), ("planets", "planets", True)),
    Bearing: (("rolling_elements", "rolling elements", True),
              ("element_diameter", "element diameter", False),
              ("pitch_diameter", "pitch diameter (same unit)", False),
              ("contact_angle_deg", "contact angle (deg)", False)),
    Rotor: (("count", "count (blades, vanes, poles)", True),),
}
_TYPE_LABELS = {GearStage: "gear stage", PlanetaryStage: "planetary stage", Bearing: "bearing",
                Rotor: "rotor"}


def _replace_source(machine, name, **changes):
    """The machine with source ``name`` changed (the machine is validated again)."""
    sources = tuple(dataclasses.replace(s, **changes) if s.name == name else s for s in machine.sources)
    new = dataclasses.replace(machine, sources=sources)
    new.lines()  # walks the train: a tooth count that breaks it fails here, with its message
    return new


def _worst(table):
    coll = table[table["kind"] == "collision"]
    return float(coll["residual_db"].max()) if len(coll) else None


class SourceEditorPanel:
    """Edit one source of a machine and compare lines and collisions before and after.

    Parameters
    ----------
    machine : Machine or path
    plan : Plan or path
    entry : str, optional
        Source shown first (default: the first editable source).
    rate_hz : float, optional
        Rate of the comparison (default: the advisor's recommendation for the machine as
        opened, else the plan's first candidate).

    Attributes
    ----------
    entry : ipywidgets.Dropdown
        Editable sources (gear stages, planetary stages, bearings, rotors).
    rate : ipywidgets.Dropdown
        The plan's candidate rates, Hz.
    fields : dict of str to ipywidgets widget
        The chosen source's editable fields (IntText for counts, FloatText for dimensions).
    reset_button : ipywidgets.Button
        Back to the machine as opened.
    figure : ipywidgets.Image
        Fold map of the edited machine with only the chosen source's lines, PNG.
    summary : ipywidgets.HTML
        Before / after table (class ``foldline-compare``).
    lines_table : ipywidgets.HTML
        The chosen source's lines before and after (class ``foldline-source-lines``).
    collisions : ipywidgets.HTML
        Collisions of the edited machine at the rate (class ``foldline-collisions``).
    message : ipywidgets.HTML
        Why the last edit was refused, if it was (class ``foldline-error``).
    result : dict
        The comparison in numbers: ``collisions``, ``worst_residual_db``,
        ``recommended_rate_hz``, each a (before, after) pair.
    widget : ipywidgets.VBox
    """

    def __init__(self, machine, plan, *, entry=None, rate_hz=None):
        self.original = as_machine(machine)
        self.plan = as_plan(plan)
        self.plan.check_against(self.original.lines())
        self.machine = self.original
        self.error = None
        self._warnings = []
        self._advice = Cache(16)
        self._tables = Cache(32)
        self._pictures = Cache(16)
        editable = [s for s in self.original.sources if type(s) in EDITABLE_FIELDS]
        if not editable:
            raise InputError(f"machine {self.original.name!r} has no gear stage, planetary stage, "
                             "bearing or rotor to edit")
        names = [s.name for s in editable]
        if entry is not None and entry not in names:
            raise InputError(f"entry {entry!r}: not an editable source of {self.original.name!r}; "
                             f"choose one of {', '.join(repr(n) for n in names)}")
        # The description column holds the longest field label ("pitch diameter (same unit)")
        # without clipping (checked in a browser at 1280 and 1920 px).
        style = {"description_width": "200px"}
        wide = widgets.Layout(width="370px")
        self.entry = widgets.Dropdown(options=[(f"{s.name} ({_TYPE_LABELS[type(s)]})", s.name) for s in editable],
                                      value=entry if entry is not None else editable[0].name,
                                      description="source", style=style, layout=wide)
        rec = self._advice_for(self.original).recommended_rate_hz
        if rate_hz is None:
            rate_hz = rec if rec is not None else sorted(self.plan.rates_hz)[0]
        rates = sorted(set(self.plan.rates_hz) | {float(rate_hz)})
        self.rate = widgets.Dropdown(options=[(fmt_rate(r), float(r)) for r in rates], value=float(rate_hz),
                                     description="rate", style=style, layout=wide)
        self.reset_button = widgets.Button(description="back to the machine as opened", layout=wide)
        self.fields = {}
        self._fields_box = widgets.VBox()
        self._style, self._wide = style, wide
        self.header = widgets.HTML()
        self.figure = widgets.Image(format="png", layout=widgets.Layout(max_width="100%"))
        self.figure.add_class("foldline-figure")
        self.summary = widgets.HTML()
        self.summary.add_class("foldline-compare-box")
        self.message = widgets.HTML()
        self.message.add_class("foldline-message-box")
        self.lines_table = widgets.HTML()
        self.collisions = widgets.HTML()
        controls = widgets.VBox([self.entry, self.rate, self._fields_box, self.reset_button, self.message],
                                layout=widgets.Layout(width="385px", flex="0 0 385px"))
        self.widget = widgets.VBox([
            self.header, widgets.HBox([controls, widgets.VBox([self.figure, self.summary])]),
            self.lines_table, self.collisions])
        self.widget.add_class("foldline-source-editor")
        self._build_fields()
        self.refresh()
        self.entry.observe(self._on_entry, names="value")
        self.rate.observe(lambda change: self.refresh(), names="value")
        self.reset_button.on_click(lambda _button: self.reset())

    # -- controls -------------------------------------------------------------------------
    def source(self, machine=None):
        """The chosen source in ``machine`` (default: the edited machine)."""
        machine = self.machine if machine is None else machine
        return next(s for s in machine.sources if s.name == self.entry.value)

    def _build_fields(self):
        src = self.source()
        self.fields = {}
        for name, label, integer in EDITABLE_FIELDS[type(src)]:
            cls = widgets.IntText if integer else widgets.FloatText
            w = cls(value=getattr(src, name), description=label, style=self._style, layout=self._wide)
            w.observe(self._on_field, names="value")
            self.fields[name] = w
        self._fields_box.children = tuple(self.fields.values())

    def _on_entry(self, change):
        self._build_fields()
        self.refresh()

    def _on_field(self, change):
        name = next(k for k, w in self.fields.items() if w is change["owner"])
        try:
            with collect_warnings() as caught:
                self.machine = _replace_source(self.machine, self.entry.value, **{name: change["new"]})
        except FoldlineError as exc:
            self.message.value = STYLE + error_html(exc) + (
                '<div class="foldline-note">the comparison shows the last valid machine</div>')
            self.error = exc
            return
        self._warnings = caught.messages
        self.refresh()

    def reset(self):
        """Undo every edit: back to the machine as opened."""
        self.machine = self.original
        self._build_fields()
        self.refresh()

    # -- computation ----------------------------------------------------------------------
    def _advice_for(self, machine):
        def make():
            with collect_warnings():
                return advise(machine, self.plan)

        return self._advice.get(machine, make)

    def _table_for(self, machine, rate):
        return self._tables.get((machine, rate), lambda: find_collisions(machine, self.plan, rate))

    def refresh(self):
        """Compare the edited machine with the machine as opened at the chosen rate."""
        self.error = None
        self.message.value = ""
        rate = float(self.rate.value)
        before, after = self.original, self.machine
        t0, t1 = self._table_for(before, rate), self._table_for(after, rate)
        a0, a1 = self._advice_for(before), self._advice_for(after)
        n0 = int((t0["kind"] == "collision").sum())
        n1 = int((t1["kind"] == "collision").sum())
        self.result = {
            "collisions": (n0, n1),
            "worst_residual_db": (_worst(t0), _worst(t1)),
            "recommended_rate_hz": (a0.recommended_rate_hz, a1.recommended_rate_hz),
        }
        src0, src1 = self.source(before), self.source(after)
        lines0 = {ln.name: ln for ln in before.lines() if ln.entry == src0.name}
        lines1 = [ln for ln in after.lines() if ln.entry == src1.name]
        self._draw(after, rate, t1, {ln.name for ln in lines1})
        self.header.value = STYLE + (
            f"<b>{html.escape(after.name)}</b>: {html.escape(src1.name)} "
            f"({_TYPE_LABELS[type(src1)]}) at {fmt_rate(rate)}; "
            + ("no edits yet" if after == before else "edited: " + html.escape(self._edits())))
        self.summary.value = STYLE + self._summary_html(rate, src1.name, t0, t1)
        top = float(self.plan.speed.rpm_max)
        rows, changed = [], []
        for ln in lines1:
            old = lines0.get(ln.name)
            o0 = None if old is None else old.order
            rows.append({"line": ln.name, "kind": ln.kind, "order0": o0, "order1": ln.order,
                         "hz0": None if old is None else float(old.hz_at(top)),
                         "hz1": float(ln.hz_at(top))})
            changed.append(o0 != ln.order)
        self.lines_table.value = STYLE + f"<b>Lines of {html.escape(src1.name)}</b>" + html_table(
            rows, (("line", "line"), ("kind", "kind"), ("order0", "order before"),
                   ("order1", "order after"), ("hz0", f"Hz at {top:g} rpm before"),
                   ("hz1", f"Hz at {top:g} rpm after")),
            css_class="foldline-source-lines", changed=changed,
            formats={"order0": ".4f", "order1": ".4f", "hz0": ".1f", "hz1": ".1f"})
        coll = t1[t1["kind"] == "collision"]
        self.collisions.value = STYLE + f"<b>Collisions of the edited machine at {fmt_rate(rate)}</b>" + html_table(
            coll.to_dict("records"),
            collision_columns(("line", "band", "rpm_min", "rpm_max", "zone", "residual_db")),
            css_class="foldline-collisions", empty="No folded line enters a band above the threshold.",
            formats=collision_formats())

    def _edits(self) -> str:
        out = []
        for s0, s1 in zip(self.original.sources, self.machine.sources):
            for f in dataclasses.fields(s0):
                v0, v1 = getattr(s0, f.name), getattr(s1, f.name)
                if v0 != v1:
                    out.append(f"{s0.name} {f.name.replace('_', ' ')} {v0:g} -> {v1:g}"
                               if isinstance(v0, (int, float)) else f"{s0.name} {f.name} {v0} -> {v1}")
        return "; ".join(out)

    def _draw(self, machine, rate, table, names):
        def make():
            fmap = fold_map(machine, self.plan, rate)
            shown = table[table["line"].isin(names)]
            return FoldScene(fmap, self.plan, shown, lines=names, labels=False).png()

        self.figure.value = self._pictures.get((machine, rate, frozenset(names)), make)

    def _summary_html(self, rate, name, t0, t1):
        def mine(t):
            c = t[t["kind"] == "collision"]
            return int(c["line"].isin({ln.name for ln in self.machine.lines() if ln.entry == name}).sum())

        def shown(v, fmt):
            if v is None or (isinstance(v, float) and math.isnan(v)):
                return "none"
            return format(v, fmt)

        n, worst, rec = (self.result[k] for k in ("collisions", "worst_residual_db", "recommended_rate_hz"))
        rows = [
            {"what": f"collisions at {fmt_rate(rate)}", "before": str(n[0]), "after": str(n[1])},
            {"what": f"... of {name}'s lines", "before": str(mine(t0)), "after": str(mine(t1))},
            {"what": "worst residual (dB)", "before": shown(worst[0], ".1f"), "after": shown(worst[1], ".1f")},
            {"what": "recommended rate (Hz)", "before": shown(rec[0], "g"), "after": shown(rec[1], "g")},
        ]
        changed = [r["before"] != r["after"] for r in rows]
        warn = "".join(f'<div class="foldline-note">{html.escape(m)}</div>'
                       for m in self._warnings)
        return html_table(rows, (("what", ""), ("before", "as opened"), ("after", "edited")),
                          css_class="foldline-compare", changed=changed) + warn

    # -- display --------------------------------------------------------------------------
    def show(self):
        """Display the panel in the notebook."""
        from IPython.display import display

        display(self.widget)

    def _ipython_display_(self):
        self.show()
