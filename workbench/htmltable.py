"""HTML tables for the report and the notebook panels (one renderer for both).

Standard library only, so the report and the panels share it without either importing the
other.  A table is written pre-sorted by its meaningful column; every cell carries its exact
value in ``data-value`` (full-precision numbers, raw text), which the report's sorting script
sorts on and which tests compare against the command's JSON output.
"""

from __future__ import annotations

import html
import math
import numbers
from dataclasses import dataclass
from typing import Any, Callable

__all__ = ["Column", "esc", "fixed", "general", "yes_no", "table_html"]


def esc(text: Any) -> str:
    """``html.escape`` of ``str(text)``, quotes included (safe in text and attributes)."""
    return html.escape(str(text), quote=True)


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return isinstance(value, float) and math.isnan(value)
    except TypeError:
        return False


@dataclass(frozen=True)
class Column:
    """One column of a report table.

    Attributes
    ----------
    key : str
        Column (or record key) the value is read from.
    label : str
        Header text.
    fmt : callable, optional
        Turns a value into the displayed text (default ``str``).  Missing values (None, NaN)
        show as an empty cell.
    numeric : bool
        Sort numerically (and right-align).
    """

    key: str
    label: str
    fmt: Callable[[Any], str] | None = None
    numeric: bool = False


def fixed(digits: int) -> Callable[[Any], str]:
    """Formatter with ``digits`` decimals; infinite values as ``-inf`` / ``inf``."""

    def f(v):
        v = float(v)
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return f"{v:.{digits}f}"

    return f


def general(digits: int = 4) -> Callable[[Any], str]:
    """Formatter with ``digits`` significant digits."""
    return lambda v: f"{float(v):.{digits}g}"


def yes_no(v: Any) -> str:
    return "yes" if bool(v) else "no"


def _data_value(value: Any, numeric: bool) -> str:
    if _is_missing(value):
        return ""
    if numeric:
        if isinstance(value, bool) or type(value).__name__ == "bool_":
            return "1" if value else "0"
        if isinstance(value, numbers.Integral):
            return str(int(value))
        v = float(value)
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    return str(value)


def table_html(records, columns, *, css_class: str, caption: str | None = None,
               empty: str = "none", attrs: dict | None = None, row_classes=None,
               missing: str = "") -> str:
    """An HTML table of ``records`` (a DataFrame or a sequence of dicts).

    Parameters
    ----------
    records : pandas.DataFrame or sequence of mapping
        Rows, already in the order to show (pre-sorted by their meaningful column).
    columns : sequence of Column
    css_class : str
        Class(es) of the ``<table>`` (tests and styles find tables by it); ``sortable`` is
        added.
    caption : str, optional
    empty : str
        Text shown in place of the table when there are no rows.
    attrs : dict, optional
        Extra attributes of the ``<table>`` element (escaped).
    row_classes : sequence of str or None, optional
        A class for each row (None or "" for none), e.g. to mark changed rows.
    missing : str
        Text of a cell whose value is missing (None, NaN); default empty.

    Returns
    -------
    str
    """
    if hasattr(records, "to_dict"):
        records = records.to_dict("records")
    records = list(records)
    extra = "".join(f' {esc(k)}="{esc(v)}"' for k, v in (attrs or {}).items())
    if not records:
        cap = f"<p class=\"caption\">{esc(caption)}</p>" if caption else ""
        return f'{cap}<p class="empty {esc(css_class)}"{extra}>{esc(empty)}</p>'
    head = "".join(
        f'<th scope="col" data-type="{"num" if c.numeric else "text"}">{esc(c.label)}</th>'
        for c in columns
    )
    rows = []
    for i, rec in enumerate(records):
        cells = []
        for c in columns:
            value = rec.get(c.key)
            shown = missing if _is_missing(value) else (c.fmt or str)(value)
            cls = ' class="num"' if c.numeric else ""
            cells.append(
                f'<td{cls} data-key="{esc(c.key)}" data-value="{esc(_data_value(value, c.numeric))}">'
                f"{esc(shown)}</td>"
            )
        mark = row_classes[i] if row_classes is not None else None
        tr = f'<tr class="{esc(mark)}">' if mark else "<tr>"
        rows.append(tr + "".join(cells) + "</tr>")
    cap = f"<caption>{esc(caption)}</caption>" if caption else ""
    return (
        f'<div class="scroll"><table class="sortable {esc(css_class)}"{extra}>{cap}'
        f"<thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
    )
