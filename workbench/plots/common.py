"""Shared figure helpers: a pyplot-free figure, and saving through an atomic rename."""

from __future__ import annotations

import io
from pathlib import Path

from matplotlib.figure import Figure

__all__ = ["new_figure", "save_figure", "figure_bytes", "KIND_COLOURS"]

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
