"""The order map and the frequency map written as data (NPZ and Parquet), and read back.

A PNG shows a map; an analyst comparing runs, or feeding another tool, needs its numbers with
their axes and units.  Two forms:

* **NPZ** (numpy): ``rpm`` (rows, rpm), ``order`` or ``hz`` (columns), ``amplitude`` (rows x
  columns), ``n_averaged`` (blocks per row), and text arrays ``kind``, ``unit``,
  ``amplitude_scaling``, ``axes`` (JSON: the name and unit of each array).  Plain arrays only,
  read back with ``allow_pickle=False``.
* **Parquet**: one row per cell, columns ``rpm``, ``order`` (or ``hz``), ``amplitude``,
  ``n_averaged`` (a tidy table pandas, Arrow and SQL engines read as is), the same metadata
  as JSON in the frame's ``attrs["foldline"]`` (pandas keeps it in the file's metadata).
  Needs pyarrow (the ``batch`` extra).

Both are written under a temporary name and renamed into place.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from workbench.errors import InputError, RunFileError
from workbench.fileio import atomic_output

__all__ = ["MapData", "map_data", "write_map_npz", "write_map_parquet", "write_map_files",
           "read_map_data", "MAP_KINDS"]

#: Which map: orders against rpm, or Hz against rpm.
MAP_KINDS = {"order": ("order", "order (multiples of reference shaft speed)"),
             "frequency": ("hz", "Hz")}


@dataclass(frozen=True, eq=False)
class MapData:
    """A map's numbers with their axes and units.

    Attributes
    ----------
    kind : {"order", "frequency"}
    rpm : ndarray, shape (B,)
        Row speeds, rpm.
    axis : ndarray, shape (K,)
        Columns: orders (``kind="order"``) or Hz.
    amplitude : ndarray, shape (B, K)
    unit : str
        Unit of ``amplitude`` (the channel's, or the shown unit of a scaled analysis).
    amplitude_scaling : str
        ``"peak"``, ``"rms"`` or a dB or integration description.
    n_averaged : ndarray of int, shape (B,)
        Blocks averaged in each row (1 where unknown).
    """

    kind: str
    rpm: np.ndarray
    axis: np.ndarray
    amplitude: np.ndarray
    unit: str = ""
    amplitude_scaling: str = "peak"
    n_averaged: np.ndarray | None = None

    @property
    def axis_name(self) -> str:
        """``"order"`` or ``"hz"``."""
        return MAP_KINDS[self.kind][0]

    def axes(self) -> dict:
        """Name -> unit of every array."""
        return {"rpm": "rpm", self.axis_name: MAP_KINDS[self.kind][1],
                "amplitude": self.unit or "channel unit", "n_averaged": "blocks"}


def map_data(map_obj, *, unit="", amplitude_scaling="peak") -> MapData:
    """:class:`MapData` of an OrderMap (``order`` axis) or an FrequencyMap (``hz`` axis)."""
    if hasattr(map_obj, "order"):
        kind, axis = "order", map_obj.order
    elif hasattr(map_obj, "hz"):
        kind, axis = "frequency", map_obj.hz
    else:
        raise InputError(f"map of type {type(map_obj).__name__}: give an OrderMap or an FrequencyMap")
    rows = np.asarray(map_obj.rpm, dtype=float)
    n = getattr(map_obj, "n_averaged", None)
    n = np.ones(rows.size, dtype=np.int64) if n is None else np.asarray(n, dtype=np.int64)
    return MapData(kind, rows, np.asarray(axis, dtype=float), np.asarray(map_obj.amplitude, dtype=float),
                   str(unit or ""), str(amplitude_scaling), n)


def _meta(d: MapData) -> dict:
    return {"kind": d.kind, "unit": d.unit, "amplitude_scaling": d.amplitude_scaling, "axes": d.axes()}


def write_map_npz(d: MapData, path, *, force=False) -> Path:
    """Write ``d`` as NPZ (plain arrays, no pickled objects); returns the path."""
    path = Path(path)
    meta = _meta(d)
    arrays = {"rpm": d.rpm, d.axis_name: d.axis, "amplitude": d.amplitude, "n_averaged": d.n_averaged,
              "kind": np.array(d.kind), "unit": np.array(d.unit),
              "amplitude_scaling": np.array(d.amplitude_scaling), "axes": np.array(json.dumps(meta["axes"]))}
    with atomic_output(path, force=force) as tmp:
        with open(tmp, "wb") as f:
            np.savez(f, **arrays)
    return path


def write_map_parquet(d: MapData, path, *, force=False) -> Path:
    """Write ``d`` as a tidy Parquet table (``rpm``, axis, ``amplitude``) with JSON metadata.

    Written by pandas (its Parquet engine, pyarrow, comes with the ``batch`` extra); the
    metadata travels as the frame's ``attrs["foldline"]``, which pandas keeps in the file.
    """
    import pandas as pd

    path = Path(path)
    b, k = d.amplitude.shape
    frame = pd.DataFrame({"rpm": np.repeat(d.rpm, k), d.axis_name: np.tile(d.axis, b),
                          "amplitude": d.amplitude.ravel(), "n_averaged": np.repeat(d.n_averaged, k)})
    frame.attrs["foldline"] = json.dumps(_meta(d))
    try:
        with atomic_output(path, force=force) as tmp:
            frame.to_parquet(tmp, index=False)
    except ImportError:
        raise InputError("writing Parquet needs pyarrow: pip install 'foldline[batch]' (or pyarrow)") from None
    return path


def read_map_data(path) -> MapData:
    """Read a map written by :func:`write_map_npz` or :func:`write_map_parquet`."""
    path = Path(path)
    suffix = path.suffix.lower()
    try:
        if suffix == ".npz":
            with np.load(path, allow_pickle=False) as z:
                kind = str(z["kind"])
                name = MAP_KINDS[kind][0]
                return MapData(kind, z["rpm"], z[name], z["amplitude"], str(z["unit"]),
                               str(z["amplitude_scaling"]), z["n_averaged"])
        if suffix == ".parquet":
            import pandas as pd

            t = pd.read_parquet(path)
            meta = json.loads(t.attrs["foldline"])
            kind = meta["kind"]
            name = MAP_KINDS[kind][0]
            k = int(np.unique(t[name].to_numpy()).size)
            b = len(t) // max(k, 1)
            return MapData(kind, t["rpm"].to_numpy().reshape(b, k)[:, 0], t[name].to_numpy()[:k],
                           t["amplitude"].to_numpy().reshape(b, k), meta["unit"], meta["amplitude_scaling"],
                           t["n_averaged"].to_numpy().reshape(b, k)[:, 0])
    except (KeyError, ValueError, OSError, ImportError) as exc:
        raise RunFileError(f"{path}: not a map written by foldline ({type(exc).__name__}: {exc})") from None
    raise InputError(f"{path}: a map is read from .npz or .parquet; got '{suffix}'")


def write_map_files(analysis, folder, *, prefix: str = "", force: bool = False) -> list:
    """A tracked channel's order map and frequency map (when computed) as data:
    ``<prefix>order_map.npz`` and ``<prefix>frequency_map.npz``, and the ``.parquet`` of each
    when pyarrow is installed (else a :class:`~workbench.errors.FoldlineWarning` says so).

    Parameters
    ----------
    analysis : RunAnalysis
        Its ``order_map``, ``rf_map``, ``unit`` and (for a scaled analysis) ``scaling``.
    folder : path-like
    prefix : str
        Put in front of each file name (the batch's ``<stem>_<sha8>_``).
    force : bool
        Replace existing files.

    Returns
    -------
    list of Path
    """
    import importlib.util
    import warnings

    from workbench.errors import FoldlineWarning

    a = analysis
    folder = Path(folder)
    sc = getattr(a, "scaling", None)
    how = "peak" if sc is None else sc.label(getattr(a, "channel_unit", None) or "")
    parquet = importlib.util.find_spec("pyarrow") is not None
    if not parquet:
        warnings.warn("the maps are written as NPZ only: Parquet needs pyarrow (pip install "
                      "'foldline[batch]')", FoldlineWarning, stacklevel=2)
    written = []
    for obj, stem in ((a.order_map, "order_map"), (getattr(a, "rf_map", None), "frequency_map")):
        if obj is None:
            continue
        d = map_data(obj, unit=a.unit, amplitude_scaling=how)
        written.append(write_map_npz(d, folder / f"{prefix}{stem}.npz", force=force))
        if parquet:
            written.append(write_map_parquet(d, folder / f"{prefix}{stem}.parquet", force=force))
    return written
