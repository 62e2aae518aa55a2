"""A fold map picture that redraws fast when only the shown sources change.

:class:`FoldScene` draws a fold map once with :func:`workbench.plots.foldmap.draw_fold_map`,
keeps the pixels of everything that does not depend on which lines are shown (axes, ticks,
bands) and redraws only the line artists on top of that background (Agg blitting).  Hiding or
showing a source therefore costs the drawing of the lines, not of the whole figure.  The legend
is handed over as HTML (its text costs more to draw than all the lines).
"""

from __future__ import annotations

import html

import numpy as np
from matplotlib.colors import to_hex

from workbench.machine.lines import kind_name
from workbench.plots.common import KIND_COLOURS
from workbench.plots.foldmap import draw_fold_map
from workbench.ui._common import agg_figure, png_bytes

__all__ = ["FoldScene"]


def _owners(ax, fmap, view):
    """Which line(s) each line artist and annotation of a fold map axes belongs to.

    A line artist belongs to line ``i`` when its x data are a contiguous run of the fold map's
    speed grid and its y data equal line ``i``'s apparent frequency (or order) on that run
    (drawn segments, collision highlights): the figure plots slices of the fold map's own
    arrays, so the comparison is exact.  Lines with identical tracks share their artists.  Annotations belong to the line named at the start
    of their text (``"<line> in <band>"``).  Artists that match no line (Nyquist, filter edge)
    belong to none and are always drawn.
    """
    rpm = fmap.rpm
    ys = fmap.apparent_hz if view == "hz" else fmap.apparent_order
    names = fmap.names
    owners = {}
    for artist in ax.lines:
        x = np.asarray(artist.get_xdata(orig=True), dtype=float)
        y = np.asarray(artist.get_ydata(orig=True), dtype=float)
        owners[artist] = frozenset()
        if x.ndim != 1 or len(x) == 0 or len(x) != len(y) or len(x) > len(rpm):
            continue
        start = int(np.searchsorted(rpm, x[0]))
        stop = start + len(x)
        if stop > len(rpm) or not np.array_equal(rpm[start:stop], x):
            continue
        head = ys[:, start]
        rows = np.flatnonzero((head == y[0]) | (np.isnan(head) & np.isnan(y[0])))
        block = ys[rows, start:stop]
        same = ((block == y[None, :]) | (np.isnan(block) & np.isnan(y)[None, :])).all(axis=1)
        owners[artist] = frozenset(names[i] for i in rows[same])
    by_length = sorted(names, key=len, reverse=True)
    for text in ax.texts:
        gid = text.get_gid() or ""
        if gid.startswith("line:"):  # a numbered collision label names its line in its gid
            owners[text] = frozenset([gid[5:]])
            continue
        label = text.get_text()
        owner = next((n for n in by_length if label.startswith(n + " in ")), None)
        owners[text] = frozenset() if owner is None else frozenset([owner])
    return owners


_DASHES = {"-": "", "solid": "", "--": "5,2", "dashed": "5,2", ":": "1,2", "dotted": "1,2",
           "-.": "5,2,1,2", "dashdot": "5,2,1,2"}


def _swatch(handle) -> str:
    """A small inline SVG drawing one legend handle (a line style or a filled band)."""
    if hasattr(handle, "get_linestyle") and hasattr(handle, "get_xdata"):
        pattern = getattr(handle, "_unscaled_dash_pattern", (0, None))[1]
        if pattern:
            dash = ",".join(f"{float(v):g}" for v in pattern)
        else:
            dash = _DASHES.get(handle.get_linestyle(), "")
        alpha = handle.get_alpha() if handle.get_alpha() is not None else 1.0
        width = max(1.0, float(handle.get_linewidth()))
        attrs = f' stroke-dasharray="{dash}"' if dash else ""
        shape = (f'<line x1="1" y1="6" x2="25" y2="6" stroke="{to_hex(handle.get_color())}" '
                 f'stroke-width="{width:.1f}" stroke-opacity="{alpha:.2f}"{attrs}/>')
    else:
        colour = handle.get_facecolor()
        shape = (f'<rect x="1" y="1" width="24" height="10" fill="{to_hex(colour)}" '
                 f'fill-opacity="{float(colour[3]):.2f}"/>')
    return f'<svg width="26" height="12" style="vertical-align: middle">{shape}</svg>'


def legend_html(legend, kinds=()) -> str:
    """The entries of a matplotlib legend (and the colours of line kinds) as compact HTML."""
    items = []
    if legend is not None:
        for handle, text in zip(legend.legend_handles, legend.get_texts()):
            items.append(f'<span style="white-space: nowrap; margin-right: 10px">{_swatch(handle)} '
                         f"{html.escape(text.get_text())}</span>")
    colours = [(k, KIND_COLOURS[k]) for k in dict.fromkeys(kinds) if k in KIND_COLOURS]
    if colours:
        items.append('<span style="white-space: nowrap">line colours: ' + " ".join(
            f'<span style="color: {c}; font-weight: bold">{html.escape(kind_name(k))}</span>' for k, c in colours)
            + "</span>")
    return f'<div class="foldline-legend foldline-note">{" ".join(items)}</div>'


class FoldScene:
    """One fold map picture: background pixels plus line artists drawn on request.

    Parameters
    ----------
    fmap : FoldMap
    plan : Plan
        Gives bands, threshold and filter (the effective plan of the panel).
    collisions : pandas.DataFrame or None
        Collision table drawn as thick red segments (its own lines' labels included).
    view : {"hz", "order"}
    bands : set of str or None
        Bands to draw (None: all).
    lines : set of str or None
        Lines drawn at all (None: all); :meth:`png` can hide more of them.
    title : str, optional
        Axes title (none by default: the panel says it in HTML).
    labels : bool, optional
        Keep the collision labels drawn in the picture (default True).  The panel leaves them
        out: its table names every collision, and the labels' boxes and arrows take longer to
        draw than all the lines together.

    Attributes
    ----------
    legend_html : str
        The figure's legend, drawn in HTML rather than in the picture.

    Notes
    -----
    A collision's label belongs to its line: hiding that line hides the label too (the other
    collisions of the band stay drawn in red and listed in the table).
    """

    def __init__(self, fmap, plan, collisions=None, *, view="hz", bands=None, lines=None, title=None,
                 labels=True):
        self.fig = agg_figure()
        self.fig.subplots_adjust(left=0.075, right=0.985, bottom=0.115, top=0.95)
        self.ax = self.fig.add_subplot()
        # bands underneath: the picture redraws the lines over a fixed background
        draw_fold_map(self.ax, fmap, plan, collisions=collisions, view=view, bands=bands, lines=lines,
                      bands_above=False)
        # The legend goes to HTML beside the picture: drawing its text costs more than the lines.
        legend = self.ax.get_legend()
        # lines are coloured by source, and the legend names each source with its colour
        self.legend_html = legend_html(legend)
        if legend is not None:
            legend.remove()
        if not labels:  # band names stay: they say which band is which
            for text in list(self.ax.texts):
                if text.get_gid() != "band-name":
                    text.remove()
        if title:
            self.ax.set_title(title, fontsize=9)
        self._owners = _owners(self.ax, fmap, view)
        self._front = sorted(self._owners, key=lambda a: a.get_zorder())
        self._background = None
        self._pngs = {}

    @property
    def line_names(self) -> frozenset:
        """Names of the lines that own at least one artist of the picture."""
        return frozenset().union(*self._owners.values())

    def _everything_shown(self, key) -> bool:
        return key is None or self.line_names <= key

    def png(self, visible=None) -> bytes:
        """PNG bytes of the picture with only the lines named in ``visible`` (None: all).

        The first picture with every line shown is one plain draw; the background is kept
        (one more draw, line artists left out) only when lines are hidden for the first time.
        """
        key = None if visible is None else frozenset(visible)
        if self._everything_shown(key):
            key = None
        if key in self._pngs:
            return self._pngs[key]
        canvas = self.fig.canvas
        if key is None and self._background is None:
            canvas.draw()
        else:
            if self._background is None:
                for artist in self._front:
                    artist.set_animated(True)
                canvas.draw()
                self._background = canvas.copy_from_bbox(self.fig.bbox)
            canvas.restore_region(self._background)
            for artist in self._front:
                owner = self._owners[artist]
                if key is None or not owner or owner & key:
                    self.ax.draw_artist(artist)
        data = png_bytes(self.fig)
        if len(self._pngs) >= 8:
            self._pngs.pop(next(iter(self._pngs)))
        self._pngs[key] = data
        return data
