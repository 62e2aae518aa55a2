"""HDF5 run files (``.h5``, ``.hdf5``) in foldline's own simple layout, read through h5py.

HDF5 says nothing about how a recording is laid out, so foldline reads one of two layouts (the
full description, with examples, is in ``docs/run-file-formats.md``).  The run lives in the
file's root group, or, when the root holds no dataset and exactly one group, in that group:

*One dataset per channel*: every 1-D numeric dataset of the group is a channel named after the
dataset, with the attributes ``unit`` (text) and ``rate_hz`` (number, Hz); all channels have the
same length.  A dataset named ``time_s``, ``time`` or ``t`` (any case) is no channel but the time
stamps in s, uniformly spaced to within
:data:`~workbench.runs.formats.base.GRID_TOLERANCE` of a sample period.  ``rate_hz`` may also be
an attribute of the group.  Channel order: the group's order (creation order where the file
tracks it, as h5py does with ``track_order=True``; otherwise alphabetical).

*One 2-D dataset*: a dataset with the attribute ``channels`` (the names, one per row or column)
holds the samples as (channels, samples) or (samples, channels), whichever axis has one entry per
name (a square array is taken as (channels, samples)); its attributes ``units`` (one text per
channel) and ``rate_hz`` give the units and the rate.  A contiguous, uncompressed float dataset
(h5py's default) is memory-mapped read-only, as a WAV file is: a recording larger than memory
can be tracked.

Every source of a rate that is present (channel attributes, group attribute, time dataset)
must agree.  Other datasets (2-D without ``channels``, strings) are left out and named in the
log.  Chunked or compressed datasets, and the one-dataset-per-channel layout, are read slice by
slice into one array in memory (the channels read only: with the sidecar's channel list or
``channels=`` the other channels are not read).  Integer datasets are values and become float64.

h5py is imported inside :func:`read` only (optional extra ``formats``), so importing foldline
does not load it.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np

from workbench.checks import RATE_RULE, describe
from workbench.errors import RunFileError
from workbench.runs.formats.base import (TIME_NAMES, FormatRead, ReadRequest, agreed_rate,
                                         uniform_rate)

__all__ = ["read"]

_BLOCK = 1 << 16


def _text(value: Any) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray) and value.shape == ():
        return _text(value.item())
    return str(value)


def _texts(value: Any, where: str, n: int | None) -> list[str]:
    items = [value] if isinstance(value, (str, bytes)) else list(np.asarray(value).reshape(-1))
    if n is not None and len(items) != n:
        raise RunFileError(f"{where}: holds {len(items)} name(s) or unit(s) for {n} channel(s); "
                           "give one per channel")
    return [_text(v).strip() for v in items]


def _rate_attr(obj, where: str) -> float | None:
    if "rate_hz" not in obj.attrs:
        return None
    value = np.asarray(obj.attrs["rate_hz"])
    if value.size != 1 or value.dtype.kind not in "iuf" or not math.isfinite(
            float(value.reshape(()))) or float(value.reshape(())) <= 0:
        raise RunFileError(f"{where}: attribute "
                           + describe("rate_hz", obj.attrs["rate_hz"], RATE_RULE))
    return float(value.reshape(()))


def _run_group(f):
    import h5py

    group = f
    members = list(group.values())
    if not any(isinstance(m, h5py.Dataset) for m in members):
        groups = [m for m in members if isinstance(m, h5py.Group)]
        if len(groups) == 1:
            group = groups[0]
    return group


def read(path: Path, request: ReadRequest) -> FormatRead:
    """Read an HDF5 run file in foldline's layout (see the module notes).

    Parameters
    ----------
    path : Path
        ``.h5`` or ``.hdf5`` file.
    request : ReadRequest
        ``channels`` names the channels to read (None: every channel).

    Returns
    -------
    FormatRead
        Channels x samples, the names, units and rate; notes ``layout``, ``group``,
        ``memory_mapped`` and the datasets left out.

    Raises
    ------
    RunFileError
        h5py missing, a file that is not HDF5, no channel, channels of different lengths,
        several 2-D datasets with ``channels``, a name or unit count that does not match, a bad
        ``rate_hz`` attribute, disagreeing rates, a non-uniform time dataset, or a requested
        channel missing.
    """
    try:
        import h5py
    except ImportError as exc:
        raise RunFileError(f"{path}: reading HDF5 files needs the h5py package; install foldline "
                           "with the 'formats' extra (pip install 'foldline[formats]')") from exc
    try:
        f = h5py.File(path, "r")
    except OSError as exc:
        raise RunFileError(f"{path}: cannot be read as an HDF5 file ({exc})") from exc
    with f:
        group = _run_group(f)
        gname = group.name
        where = f"{path}, group {gname}"
        matrices = [d for d in group.values() if isinstance(d, h5py.Dataset) and d.ndim == 2
                    and "channels" in d.attrs]
        if len(matrices) > 1:
            raise RunFileError(f"{where}: holds {len(matrices)} 2-D datasets with a 'channels' "
                               f"attribute ({', '.join(d.name for d in matrices)}); keep one "
                               "recording per group")
        if matrices:
            found = _read_matrix(path, group, matrices[0], request)
        else:
            found = _read_datasets(path, group, request)
    return found


def _ignored(group, used: set[str]) -> list[str]:
    return [name for name in group if name not in used]


def _select(path: Path, names: list[str], request: ReadRequest) -> list[int]:
    if request.channels is None:
        return list(range(len(names)))
    missing = [n for n in request.channels if n not in names]
    if missing:
        raise RunFileError(f"{path}: no channel named {', '.join(repr(m) for m in missing)}; the "
                           f"file's channels: {', '.join(names)}")
    return [names.index(n) for n in request.channels]


def _read_matrix(path: Path, group, ds, request: ReadRequest) -> FormatRead:
    where = f"{path}, dataset {ds.name}"
    a, b = ds.shape
    names_all = _texts(ds.attrs["channels"], f"{where}, attribute channels", None)
    k = len(names_all)
    if k not in (a, b):
        raise RunFileError(f"{where}: shape {ds.shape} has no axis of {k} entries, one per name "
                           "of its 'channels' attribute")
    by_row = a == k
    units_all = (_texts(ds.attrs["units"], f"{where}, attribute units", k)
                 if "units" in ds.attrs else [""] * k)
    if ds.dtype.kind not in "iuf":
        raise RunFileError(f"{where}: dtype {ds.dtype}; allowed: real numbers")
    rows = _select(path, names_all, request)
    rates = [(f"{ds.name} attribute rate_hz", r) for r in [_rate_attr(ds, where)] if r]
    rates += [(f"{group.name} attribute rate_hz", r)
              for r in [_rate_attr(group, f"{path}, group {group.name}")] if r]
    rate = agreed_rate(path, rates) if rates else None
    n = b if by_row else a
    notes: dict[str, Any] = {"layout": "2-D dataset", "dataset": ds.name,
                             "stored": "channels x samples" if by_row else "samples x channels"}
    offset = ds.id.get_offset()
    if ds.chunks is None and ds.dtype.kind == "f" and offset is not None and not ds.external:
        mm = np.memmap(path, dtype=ds.dtype, mode="r", offset=offset, shape=ds.shape)
        full = mm if by_row else mm.T
        if rows == list(range(rows[0], rows[0] + len(rows))):
            data = full[rows[0]:rows[0] + len(rows)]
            notes["memory_mapped"] = True
        else:
            data = np.ascontiguousarray(full[rows])
            notes["memory_mapped"] = False
    else:
        dtype = np.float32 if ds.dtype == np.float32 else np.float64
        data = np.empty((len(rows), n), dtype=dtype)
        for s in range(0, n, _BLOCK):
            e = min(s + _BLOCK, n)
            block = ds[:, s:e] if by_row else ds[s:e, :].T
            data[:, s:e] = block[rows]
        notes["memory_mapped"] = False
        if ds.dtype.kind in "iu":
            notes["converted_integers_to_float64"] = True
    other = _ignored(group, {ds.name.rsplit("/", 1)[-1]})
    if other:
        notes["ignored_datasets"] = other
    return FormatRead(data, rate_hz=rate, names=[names_all[r] for r in rows],
                      units=[units_all[r] for r in rows], notes=notes,
                      selected=request.channels is not None)


def _read_datasets(path: Path, group, request: ReadRequest) -> FormatRead:
    import h5py

    where = f"{path}, group {group.name}"
    channels, time_ds = [], None
    for name, item in group.items():
        if not (isinstance(item, h5py.Dataset) and item.ndim == 1 and item.dtype.kind in "iuf"):
            continue
        if name.lower() in TIME_NAMES:
            if time_ds is not None:
                raise RunFileError(f"{where}: more than one time dataset ({time_ds.name}, "
                                   f"{item.name}); keep one named one of {', '.join(TIME_NAMES)}")
            time_ds = item
        else:
            channels.append(item)
    if not channels:
        raise RunFileError(f"{where}: holds no channel: expected one 1-D numeric dataset per "
                           "channel, or one 2-D dataset with a 'channels' attribute (see "
                           "docs/run-file-formats.md)")
    names_all = [d.name.rsplit("/", 1)[-1] for d in channels]
    lengths = {d.shape[0] for d in channels}
    if len(lengths) > 1:
        listing = ", ".join(f"{n!r} {d.shape[0]}" for n, d in zip(names_all, channels))
        raise RunFileError(f"{where}: the channel datasets differ in length ({listing} "
                           "samples); one recording's channels have one length each")
    n = lengths.pop()
    rows = _select(path, names_all, request)
    picked = [channels[r] for r in rows]
    rates = [(f"{d.name} attribute rate_hz", r) for d in picked
             for r in [_rate_attr(d, f"{path}, dataset {d.name}")] if r]
    group_rate = _rate_attr(group, where)
    if group_rate:
        rates.append((f"{group.name} attribute rate_hz", group_rate))
    notes: dict[str, Any] = {"layout": "one dataset per channel", "group": group.name,
                             "memory_mapped": False}
    if time_ds is not None:
        if time_ds.shape[0] != n:
            raise RunFileError(f"{where}: time dataset {time_ds.name} has {time_ds.shape[0]} "
                               f"stamps for {n} samples per channel")
        rate, start = uniform_rate(time_ds[()], f"{path}, dataset {time_ds.name}")
        rates.append((f"{time_ds.name} time stamps", rate))
        notes["time_dataset"] = time_ds.name
        if start != 0:
            notes["time_start_s"] = start
    rate = agreed_rate(path, rates) if rates else None
    dtype = np.float32 if all(d.dtype == np.float32 for d in picked) else np.float64
    data = np.empty((len(picked), n), dtype=dtype)
    for j, d in enumerate(picked):
        for s in range(0, n, _BLOCK):
            data[j, s:s + _BLOCK] = d[s:s + _BLOCK]
    if any(d.dtype.kind in "iu" for d in picked):
        notes["converted_integers_to_float64"] = True
    used = {d.name.rsplit("/", 1)[-1] for d in channels}
    if time_ds is not None:
        used.add(time_ds.name.rsplit("/", 1)[-1])
    other = _ignored(group, used)
    if other:
        notes["ignored_datasets"] = other
    units = [_text(d.attrs["unit"]).strip() if "unit" in d.attrs else "" for d in picked]
    return FormatRead(data, rate_hz=rate, names=[names_all[r] for r in rows], units=units,
                      notes=notes, selected=request.channels is not None)
