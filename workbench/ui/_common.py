"""Helpers shared by the notebook panels: inputs, figure rendering, HTML tables and styles.

Presentation layer: the only place (with the panels) that imports ipywidgets.
"""

from __future__ import annotations

import html
import io
import math
import warnings
from collections import OrderedDict
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from workbench.errors import FoldlineWarning, InputError
from workbench.htmltable import Column, table_html

__all__ = [
    "as_machine",
    "as_plan",
    "agg_figure",
    "png_bytes",
    "html_table",
    "collision_columns",
    "collision_formats",
    "STYLE",
    "step_card",
    "Cache",
    "collect_warnings",
    "fmt_rate",
    "error_html",
]

#: Figure size (inches) and resolution (dots per inch) of the panels' pictures: 800 x 368 px.
FIGSIZE_IN = (10.0, 4.6)
DPI = 80

#: Styles of the panels' HTML (tables, verdicts, errors); every class starts with "foldline-".
STYLE = """<style>
.foldline-table {border-collapse: collapse; font-size: 12px; margin: 4px 0;}
.foldline-table th {background: #f0f0f0; padding: 2px 8px; text-align: left;
  border-bottom: 1px solid #999;}
.foldline-table td {padding: 1px 8px; border-bottom: 1px solid #e4e4e4; text-align: left;}
.foldline-table td.num {text-align: right;}
p.empty.foldline-table {color: #555;}
.foldline-table tr.foldline-changed td {background: #fff4d6;}
.foldline-verdict {font-size: 13px; line-height: 1.45;}
.foldline-verdict ul {margin: 2px 0 2px 18px; padding: 0;}
.foldline-ok {color: #1a7f37; font-weight: bold;}
.foldline-bad {color: #b00020; font-weight: bold;}
.foldline-error {color: #b00020; white-space: pre-wrap;}
.foldline-note {color: #555; font-size: 12px;}
</style>"""


def step_card(title, children):
    """One step of a panel's strip of steps: a titled card holding its controls inline.

    The panels lay their controls out as the analyst's steps from left to right (cards that
    wrap on a narrow window), with the results below at full width.
    """
    import ipywidgets as widgets

    head = widgets.HTML(f'<div class="foldline-step-title" style="font-weight: 600; '
                        f'color: #2b5d8a; margin: 2px 0 4px">{title}</div>')
    card = widgets.VBox([head, *children], layout=widgets.Layout(
        flex="1 1 300px", min_width="300px", margin="0 8px 8px 0", padding="4px 8px",
        border="1px solid #c8d0d8"))
    card.add_class("foldline-step")
    return card


def as_machine(machine):
    """A Machine from a Machine or a machine file path."""
    from workbench.machine import Machine, read_machine

    if isinstance(machine, Machine):
        return machine
    if isinstance(machine, (str, Path)):
        return read_machine(machine)
    raise InputError(f"machine = {machine!r}: give a Machine or the path of a machine file")


def as_plan(plan):
    """A Plan from a Plan or a plan file path."""
    from workbench.sampling import Plan, read_plan

    if isinstance(plan, Plan):
        return plan
    if isinstance(plan, (str, Path)):
        return read_plan(plan)
    raise InputError(f"plan = {plan!r}: give a Plan or the path of a plan file")


def agg_figure(figsize=FIGSIZE_IN, dpi=DPI) -> Figure:
    """A pyplot-free Figure with an Agg canvas attached (no global state, no GUI)."""
    fig = Figure(figsize=figsize, dpi=dpi)
    FigureCanvasAgg(fig)
    return fig


def png_bytes(fig) -> bytes:
    """PNG bytes of the pixels now in ``fig``'s Agg canvas (call after drawing).

    Uses PIL with the fastest zlib level: the pictures travel to the browser over a local
    socket, where a few more kilobytes cost less than a slower encoder.
    """
    from PIL import Image

    width, height = fig.canvas.get_width_height()
    image = Image.frombuffer("RGBA", (width, height), fig.canvas.buffer_rgba(), "raw", "RGBA", 0, 1)
    buf = io.BytesIO()
    image.save(buf, format="png", compress_level=1)
    return buf.getvalue()


def _cell_text(spec):
    """How a panel shows a value: text as is, yes/no, signed infinity, else ``format(v, spec)``."""

    def text(value):
        value = _plain(value)
        if isinstance(value, str):
            return value
        if isinstance(value, bool):
            return "yes" if value else "no"
        if isinstance(value, float) and math.isinf(value):
            return f"{'-' if value < 0 else ''}\u221e"
        return format(value, spec)

    return text


def collision_columns(keys) -> tuple:
    """(key, heading) pairs of collision-table columns, headings from the sampling layer."""
    from workbench.sampling import COLLISION_HEADINGS

    return tuple((k, COLLISION_HEADINGS[k]) for k in keys)


def collision_formats() -> dict:
    """Format specs of the collision table's columns (``.0f``, ``.1f``; ``d`` for zones)."""
    from workbench.sampling import COLLISION_DECIMALS

    return {k: "d" if k == "zone" else f".{d}f" for k, d in COLLISION_DECIMALS.items()}


def _is_number(value) -> bool:
    value = _plain(value)
    return (isinstance(value, (int, float)) and not isinstance(value, bool)
            and not (isinstance(value, float) and math.isnan(value)))


def html_table(rows, columns, *, css_class, formats=None, changed=None, empty="(none)") -> str:
    """An HTML table with the classes ``foldline-table`` and ``css_class``.

    Drawn by :func:`workbench.htmltable.table_html`, the report's renderer, so a panel's table
    and the report's carry the same markup (``data-value`` on every cell).

    Parameters
    ----------
    rows : iterable of mapping
        One mapping per row.
    columns : sequence of (key, heading)
        Which keys to show, with their headings (units in the headings).
    css_class : str
        Extra class naming the table (tests and styles find it by this class).
    formats : dict of str to str, optional
        Format spec per key (default ``"g"``).
    changed : sequence of bool, optional
        Rows to mark with the class ``foldline-changed``.
    empty : str
        Text shown instead of the table when there are no rows.
    """
    rows = list(rows)
    formats = formats or {}
    cols = [Column(k, h, _cell_text(formats.get(k, "g")),
                   numeric=any(_is_number(r.get(k)) for r in rows))
            for k, h in columns]
    marks = None if changed is None else ["foldline-changed" if c else None for c in changed]
    return table_html(rows, cols, css_class=f"foldline-table {css_class}", empty=empty,
                      row_classes=marks, missing="\u2013")


def _plain(value):
    """numpy scalars to Python scalars, so formatting and type checks behave."""
    if isinstance(value, np.generic):
        return value.item()
    return value


class Cache:
    """A small least-recently-used mapping (the panels' memo of fold maps, tables, figures)."""

    def __init__(self, size: int):
        self.size = int(size)
        self._items: OrderedDict = OrderedDict()

    def get(self, key, make):
        """The value stored under ``key``, made by ``make()`` when missing."""
        if key in self._items:
            self._items.move_to_end(key)
            return self._items[key]
        value = make()
        self._items[key] = value
        while len(self._items) > self.size:
            self._items.popitem(last=False)
        return value

    def put(self, key, value):
        self._items[key] = value
        self._items.move_to_end(key)
        while len(self._items) > self.size:
            self._items.popitem(last=False)


class collect_warnings(warnings.catch_warnings):
    """Record foldline warnings raised inside the block (they are shown in the panel)."""

    def __init__(self):
        super().__init__(record=True)

    def __enter__(self):
        self.records = super().__enter__()
        warnings.simplefilter("always", FoldlineWarning)
        return self

    @property
    def messages(self) -> list:
        seen = []
        for w in self.records:
            text = str(w.message)
            if issubclass(w.category, FoldlineWarning) and text not in seen:
                seen.append(text)
        return seen


def fmt_rate(rate_hz: float) -> str:
    """A rate as people write it: ``"10240 Hz"``, ``"2560 Hz"``, ``"4410.5 Hz"``."""
    return f"{float(rate_hz):g} Hz"


def error_html(exc: Exception) -> str:
    """An error message the panel shows in place of a result."""
    return f'<div class="foldline-error">{html.escape(str(exc))}</div>'
