"""Shared figure helpers: a pyplot-free figure, and saving through an atomic rename."""

from __future__ import annotations

import io
from pathlib import Path

from matplotlib.figure import Figure

__all__ = ["new_figure", "save_figure", "figure_bytes", "KIND_COLOURS", "place_labels"]

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


def place_labels(ax, candidates, *, min_separation_px=16.0, occupied=()):
    """Choose for each label one of its candidate points so that no two labels overlap.

    Parameters
    ----------
    ax : matplotlib Axes
        Its limits must be final (the choice is made in display pixels).
    candidates : sequence of array_like, shape (n_i, 2)
        For each label, candidate (x, y) points in data coordinates, most preferred first.
    min_separation_px : float
        Least distance between two labels' anchor points, display pixels.
    occupied : sequence of (x, y)
        Points (data coordinates) already taken.

    Returns
    -------
    list of (x, y) or None
        The chosen point of each label, or None where every candidate was taken (the caller
        then lists the label in its key only).
    """
    import numpy as np

    fig = ax.figure
    fig.draw_without_rendering()  # final layout, so pixel distances are the saved ones
    bbox = ax.get_window_extent()
    taken = [ax.transData.transform(p) for p in occupied]
    out = []
    for cand in candidates:
        cand = np.asarray(cand, dtype=float).reshape(-1, 2)
        cand = cand[np.all(np.isfinite(cand), axis=1)]
        chosen = None
        if len(cand):
            pix = ax.transData.transform(cand)
            inside = ((pix[:, 0] > bbox.x0 + 8) & (pix[:, 0] < bbox.x1 - 8)
                      & (pix[:, 1] > bbox.y0 + 8) & (pix[:, 1] < bbox.y1 - 8))
            for k in np.flatnonzero(inside):
                if all(np.hypot(*(pix[k] - t)) >= min_separation_px for t in taken):
                    chosen = (float(cand[k, 0]), float(cand[k, 1]))
                    taken.append(pix[k])
                    break
        out.append(chosen)
    return out
