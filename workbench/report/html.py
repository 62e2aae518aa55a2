"""HTML building blocks of the report: escaping, tables, inline figures, page frame.

Everything here is standard library plus matplotlib (for figures).  The page is one file with
no outside resource of any kind: styles and the small table-sorting script are inline, figures
are inline SVG, and a Content-Security-Policy in the page forbids every network load, so a
browser opening it from disk never asks a server for anything.

Tables are written pre-sorted by their meaningful column, so they read correctly with scripts
off; the inline script only adds sorting on a header click (progressive enhancement).  Every
cell carries its exact value in ``data-value`` (full-precision numbers, raw text), which the
script sorts on and which tests compare against the command's JSON output.
"""

from __future__ import annotations

import base64
import hashlib
import io
import re

from workbench.htmltable import Column, esc, fixed, general, table_html, yes_no

__all__ = ["Column", "esc", "fixed", "general", "yes_no", "table_html", "key_value_html", "figure_svg",
           "page", "SORT_SCRIPT", "STYLE"]


def key_value_html(pairs, *, css_class: str) -> str:
    """A two-column description list (name, value) for settings and summaries."""
    items = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in pairs)
    return f'<dl class="kv {esc(css_class)}">{items}</dl>'


_XML_PROLOG = re.compile(r"^\s*<\?xml[^>]*\?>\s*(<!DOCTYPE[^>]*>\s*)?", re.S)


def figure_svg(fig, *, key: str, caption: str, alt: str) -> str:
    """A matplotlib figure as an inline ``<figure>`` holding its SVG.

    Text is drawn as paths (no font is needed), rasterized artists (colour maps) are embedded
    PNG data, the SVG's element ids are salted with ``key`` so that several figures in one page
    never share an id, and the date stamp is left out so the same figure gives the same bytes.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    key : str
        Unique name of the figure in the page (also its ``data-figure`` attribute).
    caption, alt : str
        Caption under the figure; accessible description of the image.
    """
    import matplotlib as mpl

    buf = io.BytesIO()
    with mpl.rc_context({"svg.hashsalt": f"foldline-{key}", "svg.fonttype": "path"}):
        fig.savefig(buf, format="svg", metadata={"Date": None})
    svg = _XML_PROLOG.sub("", buf.getvalue().decode("utf-8"), count=1)
    svg = svg.replace("<svg ", f'<svg role="img" aria-label="{esc(alt)}" ', 1)
    return (
        f'<figure class="plot" data-figure="{esc(key)}">{svg}'
        f"<figcaption>{esc(caption)}</figcaption></figure>"
    )


STYLE = """
:root { --ink: #1a1a1a; --muted: #555; --rule: #d0d0d0; --head: #eef2f6; --bad: #a00000;
        --good: #006b3c; --warn-bg: #fff4e5; --warn-rule: #e69f00; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial,
       sans-serif; color: var(--ink); margin: 0 auto; max-width: 1180px; padding: 1.5rem 2rem 4rem;
       line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.6rem; margin: 0 0 .25rem; }
h2 { font-size: 1.25rem; margin: 2.2rem 0 .6rem; padding-bottom: .2rem;
     border-bottom: 2px solid var(--rule); }
h3 { font-size: 1.05rem; margin: 1.4rem 0 .4rem; }
p.sub { color: var(--muted); margin-top: 0; }
nav ol { columns: 2; padding-left: 1.2rem; }
.scroll { overflow-x: auto; margin: .4rem 0 1rem; }
table { border-collapse: collapse; font-size: .86rem; font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding: .2rem 0 .4rem; }
th, td { border: 1px solid var(--rule); padding: .22rem .5rem; vertical-align: top; }
th { background: var(--head); text-align: left; white-space: nowrap; }
td.num { text-align: right; white-space: nowrap; }
table.sortable.js th { cursor: pointer; user-select: none; }
table.sortable.js th::after { content: " \\2195"; color: #999; font-size: .8em; }
table.sortable.js th[aria-sort=ascending]::after { content: " \\25B2"; color: var(--ink); }
table.sortable.js th[aria-sort=descending]::after { content: " \\25BC"; color: var(--ink); }
tbody tr:nth-child(even) { background: #fafafa; }
dl.kv { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1rem; margin: .4rem 0 1rem; }
dl.kv dt { font-weight: 600; }
dl.kv dd { margin: 0; }
figure.plot { margin: .8rem 0 1.4rem; }
figure.plot svg { max-width: 100%; height: auto; display: block; }
figcaption { color: var(--muted); font-size: .86rem; }
.verdict { font-weight: 600; }
.bad { color: var(--bad); }
.good { color: var(--good); }
.verdict-box { border: 2px solid var(--rule); border-left-width: 8px; padding: .5rem 1rem;
               margin: .8rem 0; }
.verdict-box.good { border-color: var(--good); }
.verdict-box.bad { border-color: var(--bad); }
.verdict-box p { margin: .2rem 0; }
.verdict-box p.note { color: var(--muted); font-size: .86rem; }
.test-header dl.kv { margin-bottom: .4rem; }
table.signoff { width: 100%; margin-top: .6rem; }
table.signoff td.blank { height: 2.6rem; min-width: 10rem; }
.safety { background: var(--warn-bg); border-left: 4px solid var(--warn-rule); padding: .6rem 1rem; }
p.empty { color: var(--muted); font-style: italic; }
details > summary { cursor: pointer; font-weight: 600; margin: .4rem 0; }
code, .mono { font-family: ui-monospace, SFMono-Regular, Menlo, Consolas, monospace; font-size: .85em; }
ul.notes li { margin: .15rem 0; }
footer { margin-top: 3rem; color: var(--muted); font-size: .82rem; }
@media print { nav { display: none; } h2 { break-after: avoid; } figure { break-inside: avoid; } }
"""

#: Sort a table by a header click: numbers by value, text alphabetically; click again to
#: reverse.  Written for this page only; it loads nothing.
SORT_SCRIPT = r"""
(function () {
  "use strict";
  function value(cell, numeric) {
    var v = cell.getAttribute("data-value");
    if (!numeric) { return v === null ? cell.textContent : v; }
    if (v === null || v === "") { return NaN; }
    if (v === "inf") { return Infinity; }
    if (v === "-inf") { return -Infinity; }
    return parseFloat(v);
  }
  // Case-insensitive text order in which digit runs compare as numbers ("x2" before "x10").
  function natural(x, y) {
    var a = String(x).toLowerCase().split(/(\d+)/), b = String(y).toLowerCase().split(/(\d+)/);
    for (var i = 0; i < Math.min(a.length, b.length); i++) {
      if (a[i] === b[i]) { continue; }
      if (i % 2 === 1) { return parseInt(a[i], 10) - parseInt(b[i], 10) || (a[i] < b[i] ? -1 : 1); }
      return a[i] < b[i] ? -1 : 1;
    }
    return a.length - b.length;
  }
  function sortBy(table, index, th) {
    var numeric = th.getAttribute("data-type") === "num";
    var ascending = th.getAttribute("aria-sort") !== "ascending";
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    var keyed = rows.map(function (row, i) { return [value(row.cells[index], numeric), i, row]; });
    keyed.sort(function (a, b) {
      var x = a[0], y = b[0], c;
      if (numeric) {
        var xn = isNaN(x), yn = isNaN(y);
        if (xn || yn) { c = xn === yn ? 0 : (xn ? 1 : -1); return c !== 0 ? c : a[1] - b[1]; }
        c = x < y ? -1 : (x > y ? 1 : 0);
      } else {
        c = natural(x, y);
      }
      if (!ascending) { c = -c; }
      return c !== 0 ? c : a[1] - b[1];
    });
    keyed.forEach(function (k) { body.appendChild(k[2]); });
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (h) { h.removeAttribute("aria-sort"); });
    th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
  }
  Array.prototype.forEach.call(document.querySelectorAll("table.sortable"), function (table) {
    table.classList.add("js");
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, index) {
      th.tabIndex = 0;
      th.title = "sort by this column";
      th.addEventListener("click", function () { sortBy(table, index, th); });
      th.addEventListener("keydown", function (e) {
        if (e.key === "Enter" || e.key === " ") { e.preventDefault(); sortBy(table, index, th); }
      });
    });
  });
}());
"""


def _csp_hash(text: str) -> str:
    return "sha256-" + base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii")


def page(*, title: str, body: str, lang: str = "en") -> str:
    """The whole HTML document: head with inline style and a Content-Security-Policy that
    allows only inline styles, ``data:`` images and this page's own script (by hash)."""
    csp = (
        "default-src 'none'; img-src data:; style-src 'unsafe-inline'; "
        f"script-src '{_csp_hash(SORT_SCRIPT)}'; base-uri 'none'; form-action 'none'"
    )
    return (
        f'<!DOCTYPE html>\n<html lang="{esc(lang)}">\n<head>\n<meta charset="utf-8">\n'
        f'<meta http-equiv="Content-Security-Policy" content="{esc(csp)}">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        '<meta name="generator" content="foldline">\n'
        f"<title>{esc(title)}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n{body}\n"
        f"<script>{SORT_SCRIPT}</script>\n</body>\n</html>\n"
    )
