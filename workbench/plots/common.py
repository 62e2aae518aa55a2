"""Shared figure helpers: a pyplot-free figure, and saving through an atomic rename."""

from __future__ import annotations

import io
from pathlib import Path

from matplotlib.figure import Figure

__all__ = ["new_figure", "save_figure", "figure_bytes", "KIND_COLOURS", "place_labels", "SOURCE_PALETTE",
           "source_colours", "text_size_px"]

#: Colour of each line kind family (colour-blind safe palette of Wong, Nature Methods 8:441, 2011).
KIND_COLOURS = {
    "shaft": "#000000",
    "order": "#000000",
    "line": "#999999",
    "mesh": "#0072B2",
    "sideband": "#56B4E9",
    "ftf": "#CC79A7",
    "bpfo": "#D55E00",
    "bpfi": "#E69F00",
    "bsf": "#CC79A7",
    "rotor": "#009E73",
    "planet_pass": "#0072B2",
    "planet_spin": "#56B4E9",
    "sun_fault": "#56B4E9",
    "planet_fault": "#56B4E9",
    "ring_fault": "#56B4E9",
}


def new_figure(width_in=9.0, height_in=5.5, **kwargs) -> Figure:
    """A matplotlib Figure not registered with pyplot (no global state, no GUI)."""
    return Figure(figsize=(width_in, height_in), layout="constrained", **kwargs)


def figure_bytes(fig, fmt="png", dpi=110) -> bytes:
    """Render a figure to PNG or SVG bytes."""
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, dpi=dpi)
    return buf.getvalue()


def save_figure(fig, path, *, force=False, dpi=110) -> Path:
    """Save ``fig`` to ``path`` (format from the extension) through a temporary name.

    Raises
    ------
    OutputExistsError
        When ``path`` exists and ``force`` is False.
    InputError
        When the extension names no format matplotlib can write.
    """
    from workbench.runs import atomic_output

    from workbench.errors import InputError

    path = Path(path)
    fmt = path.suffix.lstrip(".").lower() or "png"
    allowed = sorted(fig.canvas.get_supported_filetypes())
    if fmt not in allowed:
        raise InputError(f"{path}: a figure cannot be saved as '.{fmt}'; allowed extensions: "
                         + ", ".join(f".{k}" for k in allowed))
    data = figure_bytes(fig, fmt=fmt, dpi=dpi)
    with atomic_output(path, force=force) as tmp:
        Path(tmp).write_bytes(data)
    return path


def place_labels(ax, candidates, *, min_separation_px=16.0, occupied=(), sizes=None):
    """Choose for each label one of its candidate points so that no two labels overlap.

    Parameters
    ----------
    ax : matplotlib Axes
        Its limits must be final (the choice is made in display pixels).
    candidates : sequence of array_like, shape (n_i, 2)
        For each label, candidate (x, y) points in data coordinates, most preferred first.
    min_separation_px : float
        Least distance between two labels' anchor points, display pixels (labels without a
        size).
    occupied : sequence of (x, y)
        Points (data coordinates) already taken (a box of ``min_separation_px`` around each).
    sizes : sequence of (width_px, height_px), optional
        Size of each label's box, its anchor at the left middle of the box; boxes of
        different labels must not intersect (with a 2-pixel margin).  Without sizes a label
        is a box of ``min_separation_px`` centred on its anchor.

    Returns
    -------
    list of (x, y) or None
        The chosen point of each label, or None where every candidate was taken (the caller
        then lists the label in its key only).
    """
    import numpy as np

    fig = ax.figure
    if fig.get_layout_engine() is not None:  # the layout moves the axes: settle it first
        fig.draw_without_rendering()
    bbox = ax.get_window_extent()
    d = float(min_separation_px)
    taken = []  # (x0, y0, x1, y1) in pixels
    for p in occupied:
        x, y = ax.transData.transform(p)
        taken.append((x - d / 2, y - d / 2, x + d / 2, y + d / 2))
    out = []
    for i, cand in enumerate(candidates):
        cand = np.asarray(cand, dtype=float).reshape(-1, 2)
        cand = cand[np.all(np.isfinite(cand), axis=1)]
        w, h = (d, d) if sizes is None else (float(sizes[i][0]), float(sizes[i][1]))
        dx0 = -d / 2 if sizes is None else 0.0
        chosen = None
        if len(cand):
            pix = ax.transData.transform(cand)
            for k in range(len(pix)):
                x0, y0 = pix[k, 0] + dx0, pix[k, 1] - h / 2
                x1, y1 = x0 + w, y0 + h
                if x0 < bbox.x0 + 2 or x1 > bbox.x1 - 2 or y0 < bbox.y0 + 2 or y1 > bbox.y1 - 2:
                    continue
                if all(x1 + 2 <= a0 or a1 + 2 <= x0 or y1 + 2 <= b0 or b1 + 2 <= y0 for a0, b0, a1, b1 in taken):
                    chosen = (float(cand[k, 0]), float(cand[k, 1]))
                    taken.append((x0, y0, x1, y1))
                    break
        out.append(chosen)
    return out


def text_size_px(text, fontsize, dpi=100.0):
    """Rough box of a one-line text, pixels: 0.6 em per character wide, 1.5 em high (+ padding)."""
    em = fontsize * dpi / 72.0
    return (0.6 * em * len(str(text)) + 6.0, 1.5 * em + 4.0)


#: Colours of sources on a fold map, assigned in the machine's order: the colour-blind safe
#: palette of Wong (Nature Methods 8:441, 2011) without its yellow (too pale on white), then
#: matplotlib's tab10 for machines with more sources.
SOURCE_PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000",
                  "#8C564B", "#7F7F7F", "#BCBD22", "#17BECF", "#9467BD", "#D62728", "#2CA02C")


def source_colours(lines) -> dict:
    """One colour per source entry of ``lines`` (entry name -> colour), in first-seen order."""
    entries = list(dict.fromkeys(ln.entry for ln in lines))
    return {e: SOURCE_PALETTE[i % len(SOURCE_PALETTE)] for i, e in enumerate(entries)}
