"""ASAM MDF4 measurement files (``.mf4``), read through the asammdf package.

An MDF4 file holds channel groups; each group has a master channel (the time stamps, in s) and
value channels sampled at those stamps.  foldline reads:

* channel names and units (``Signal.unit``) from the file;
* the sample rate from the group's master channel, which must be uniformly spaced to within
  :data:`~workbench.runs.formats.base.GRID_TOLERANCE` of a sample period (else an error naming
  the sample: resample before export); a group without a master channel gives no rate (set
  ``rate_hz`` in the sidecar);
* physical values (the file's conversion applied); integer channels become float64 values.

Which channels: the ones the request names (the sidecar's channel list, or ``channels=``), else
every value channel of the file.  They must share one time base: channels at different rates are
refused with a message listing each channel's group and rate, so that the user can name the
ones to read.  Channels from several groups are accepted when their time bases are the same.

Memory: asammdf gives each channel as one array, so the channels read are held in memory
(8 bytes per sample and channel for float64 channels, 4 for float32 ones) together with one
group's time stamps; channels that are not asked for are not read.

asammdf is imported inside :func:`read` only (optional extra ``formats``), so importing foldline
does not load it.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from workbench.errors import RunFileError
from workbench.runs.formats.base import FormatRead, ReadRequest, uniform_rate

__all__ = ["read"]


def _open(path: Path):
    with open(path, "rb") as f:
        magic = f.read(8)
    if not magic.startswith(b"MDF "):  # the identification block starts every MDF file
        raise RunFileError(f"{path}: is not an MDF file (it does not start with 'MDF'); export "
                           "the measurement as MDF4 again, or give it the suffix of its format")
    try:
        from asammdf import MDF
    except ImportError as exc:
        raise RunFileError(f"{path}: reading MDF4 files needs the asammdf package; install "
                           "foldline with the 'formats' extra (pip install 'foldline[formats]')"
                           ) from exc
    try:
        return MDF(path)
    except Exception as exc:  # asammdf raises many kinds on a damaged or foreign file
        raise RunFileError(f"{path}: cannot be read as an MDF4 file ({type(exc).__name__}: "
                           f"{exc})") from exc


def _value_channels(mdf) -> dict[str, list[tuple[int, int]]]:
    """Value channel name -> [(group, index)] (master channels left out), in file order."""
    found: dict[str, list[tuple[int, int]]] = {}
    for g, group in enumerate(mdf.groups):
        master = mdf.masters_db.get(g)
        for i, ch in enumerate(group.channels):
            if i == master:
                continue
            found.setdefault(ch.name, []).append((g, i))
    return found


def _time_base(mdf, path: Path, group: int, cache: dict) -> tuple[float | None, float, int]:
    """(rate in Hz or None, start in s, samples) of one channel group."""
    if group not in cache:
        n = int(mdf.groups[group].channel_group.cycles_nr)
        if mdf.masters_db.get(group) is None:
            cache[group] = (None, 0.0, n)
        else:
            t = np.asarray(mdf.get_master(group))
            rate, start = uniform_rate(t, f"{path}, channel group {group} (master channel)")
            cache[group] = (rate, start, int(t.size))
    return cache[group]


def read(path: Path, request: ReadRequest) -> FormatRead:
    """Read the channels of an MDF4 file (see the module notes).

    Parameters
    ----------
    path : Path
        ``.mf4`` file.
    request : ReadRequest
        ``channels`` names the channels to read (None: every value channel).

    Returns
    -------
    FormatRead
        Channels x samples (float64, or float32 when every channel read is float32), the names,
        the units, the rate, and notes: ``groups`` read and ``time_start_s`` when not 0.

    Raises
    ------
    RunFileError
        asammdf missing, an unreadable file, a requested channel missing or named in several
        groups, channels at different rates or lengths (each listed), a non-uniform time base,
        or a channel that is not numeric.
    """
    mdf = _open(path)
    try:
        return _read(mdf, path, request)
    finally:
        mdf.close()


def _read(mdf, path: Path, request: ReadRequest) -> FormatRead:
    chans = _value_channels(mdf)
    if not chans:
        raise RunFileError(f"{path}: holds no value channel (only time stamps or nothing)")
    wanted = list(request.channels) if request.channels else list(chans)
    missing = [n for n in wanted if n not in chans]
    if missing:
        raise RunFileError(f"{path}: no channel named {', '.join(repr(m) for m in missing)}; the "
                           f"file's channels: {', '.join(chans)}")
    where: list[tuple[int, int]] = []
    for name in wanted:
        places = chans[name]
        if len(places) > 1:
            groups = ", ".join(str(g) for g, _ in places)
            raise RunFileError(f"{path}: channel {name!r} appears in channel groups {groups}; "
                               "rename it in the file (asammdf can) so each name is unique")
        where.append(places[0])
    cache: dict[int, tuple[float | None, float, int]] = {}
    bases = [_time_base(mdf, path, g, cache) for g, _ in where]
    if len(set(bases)) > 1:
        listing = "; ".join(
            f"{name!r} (group {g}): " + (f"{b[0]:.10g} Hz" if b[0] else "no time stamps")
            + f", {b[2]} samples from {b[1]:.9g} s" for name, (g, _), b in zip(wanted, where, bases))
        raise RunFileError(f"{path}: the channels are not sampled together: {listing}; name the "
                           "channels to read, all at one rate (list them in the sidecar's "
                           "\"channels\", or read_run(..., channels=[...]))")
    rate, start, n = bases[0]
    signals = []
    for name, (g, i) in zip(wanted, where):
        try:
            sig = mdf.get(name, group=g, index=i)
        except Exception as exc:
            raise RunFileError(f"{path}: channel {name!r} (group {g}) cannot be read "
                               f"({type(exc).__name__}: {exc})") from exc
        samples = np.asarray(sig.samples)
        if samples.ndim != 1 or samples.dtype.kind not in "iuf":
            raise RunFileError(f"{path}: channel {name!r} holds {samples.dtype} values of shape "
                               f"{samples.shape}; allowed: one number per time stamp")
        signals.append((samples, str(sig.unit or "")))
    dtype = np.float32 if all(s.dtype == np.float32 for s, _ in signals) else np.float64
    data = np.empty((len(signals), n), dtype=dtype)
    for row, (samples, _) in enumerate(signals):
        data[row] = samples
    notes: dict[str, Any] = {"groups": sorted({g for g, _ in where})}
    if start != 0:
        notes["time_start_s"] = start
    if any(s.dtype.kind in "iu" for s, _ in signals):
        notes["converted_integers_to_float64"] = True
    return FormatRead(data, rate_hz=rate, names=wanted, units=[u for _, u in signals],
                      notes=notes, selected=request.channels is not None)
