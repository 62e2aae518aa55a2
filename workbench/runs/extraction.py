"""Files of an order extraction: each order's waveform (WAV) and envelope (CSV).

Used by ``foldline extract --out`` and the notebook's extraction tab, so both write the same
files: ``order_<k>.wav`` (float32, the channel's rate and length, values in the channel's unit;
zero outside the span where the speed is known) and ``order_<k>.csv`` (``time_s, rpm,
amplitude, phase_deg`` on the envelope grid), ``k`` written as ``%g`` (``order_4.1.wav``).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from workbench.fileio import atomic_output
from workbench.runs.formats.wav import WavWriter

__all__ = ["order_file_stem", "order_files", "write_order_waveform", "write_order_envelope"]


def order_file_stem(order: float) -> str:
    """``order_<k>`` with ``k`` written as ``%g`` (``order_4``, ``order_4.1``)."""
    return f"order_{order:g}"


def order_files(orders, folder) -> list:
    """The WAV and CSV paths an extraction of ``orders`` writes into ``folder``."""
    folder = Path(folder)
    return [folder / f"{order_file_stem(o)}.{ext}" for o in orders for ext in ("wav", "csv")]


def write_order_waveform(extraction, order, folder, *, force: bool = False) -> Path:
    """Write one order's waveform as a float32 WAV at the channel's rate and length (streamed).

    Parameters
    ----------
    extraction : OrderExtraction
    order : float
        One of ``extraction.orders``.
    folder : path-like
        Existing folder.
    force : bool
        Replace an existing file.

    Returns
    -------
    Path
    """
    k = extraction.index(order)
    o = extraction.orders[k]
    path = Path(folder) / f"{order_file_stem(o)}.wav"
    with WavWriter(path, extraction.rate_hz, 1, sample_format="float32", force=force,
                   channel_names=(order_file_stem(o),)) as w:
        for piece in extraction.iter_waveform(o):
            w.write(piece.astype(np.float32))
    return path


def write_order_envelope(extraction, order, folder, *, force: bool = False) -> Path:
    """Write one order's envelope as CSV ``time_s, rpm, amplitude, phase_deg``."""
    k = extraction.index(order)
    path = Path(folder) / f"{order_file_stem(extraction.orders[k])}.csv"
    table = pd.DataFrame({"time_s": extraction.time_s, "rpm": extraction.rpm,
                          "amplitude": extraction.amplitude[k],
                          "phase_deg": extraction.phase_deg[k]})
    with atomic_output(path, force=force) as tmp:
        table.to_csv(tmp, index=False)
    return path
