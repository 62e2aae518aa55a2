"""Reading and writing run files, each with an optional JSON sidecar.

:func:`read_run` finds the file's format by its suffix in the registry of
:mod:`workbench.runs.formats` (WAV, CSV, NPZ, MAT, MDF4, HDF5), has that format's reader read
the samples (memory-mapped for WAV and contiguous HDF5 where the sample format allows), merges
what the file says with what the sidecar and the caller say, refuses conflicts, and checks every
value is finite.  :func:`write_run` writes a WAV (streamed, chunk by chunk) or NPZ file and its
sidecar, never leaving a partial file.

Where each format gets its rate, channel names and units (``docs/run-file-formats.md`` tells
users the same):

========  ===========================  ==============================  ====================
format    rate                         names                           units
========  ===========================  ==============================  ====================
.wav      header                       sidecar, else ``ch1``, ...       sidecar
.csv      time column, or sidecar /    header row                      units row / sidecar
          ``rate_hz=``
.npz      key ``rate_hz``, or sidecar  key ``channel_names``, sidecar  sidecar
          / ``rate_hz=``
.mat      sidecar / ``rate_hz=``       variable names                  sidecar
.mf4      master channel (time         channel names                   channel units /
          stamps), or sidecar                                          sidecar
.h5       attribute ``rate_hz`` or     dataset names / attribute       attribute ``unit`` /
.hdf5     ``time`` dataset, or sidecar ``channels``                    ``units`` / sidecar
========  ===========================  ==============================  ====================

When two of these give a rate (or names, or units) they must agree; a conflict is an error,
never a silent choice.  For WAV, CSV, NPZ and MAT the sidecar lists every channel in file order;
for MDF4 and HDF5, whose channels have names, it picks channels by name and only those are read.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from workbench.checks import describe, rate_hz as check_rate
from workbench.errors import FoldlineWarning, InputError, RunFileError
from workbench.fileio import atomic_output, check_writable
from workbench.runs.formats import (RunFormat, ReadRequest, format_for, known_suffixes,
                                    reader_for, writer_for)
from workbench.runs.formats.base import agreed_rate
from workbench.runs.run import Channel, Run, release_pages
from workbench.runs.sidecar import Sidecar, read_sidecar, sidecar_path, write_sidecar

__all__ = ["RUN_EXTENSIONS", "read_run", "write_run", "check_finite", "sidecar_for_run"]

#: Extensions :func:`read_run` accepts (the built-in formats' suffixes; see
#: :func:`workbench.runs.formats.known_suffixes` for formats registered later).
RUN_EXTENSIONS = known_suffixes()
_CHUNK = 1 << 16


# --------------------------------------------------------------------------- finite check
def check_finite(data: np.ndarray, names: tuple[str, ...] | list[str], rate_hz: float,
                 source: str, *, line_of: Callable[[int], int] | None = None) -> None:
    """Refuse NaN or infinite values, naming the channel and the first bad sample's time.

    Integer data cannot hold them and are not scanned.  Float data are scanned in chunks of
    65,536 samples, so a memory-mapped file is never loaded whole.

    Parameters
    ----------
    data : ndarray, shape (n_channels, n_samples)
        Raw run data.
    names : sequence of str
        Channel names, one per row.
    rate_hz : float
        Sample rate in Hz (for the time in the message).
    source : str
        File name for the message.
    line_of : callable, optional
        Maps a 0-based sample index to a 1-based line number of a text file.

    Raises
    ------
    RunFileError
        The first non-finite value (earliest in time, then lowest channel).
    """
    if data.dtype.kind != "f":
        return
    n = data.shape[1]
    for a in range(0, n, _CHUNK):
        block = np.asarray(data[:, a:a + _CHUNK])
        release_pages(data, a)
        bad = ~np.isfinite(block)
        if bad.any():
            cols = np.where(bad.any(axis=0))[0]
            col = int(cols[0])
            row = int(np.where(bad[:, col])[0][0])
            k = a + col
            line = f", line {line_of(k)}" if line_of else ""
            raise RunFileError(f"{source}: channel '{names[row]}' holds {block[row, col]} at "
                               f"sample {k + 1} (t = {k / rate_hz:.9g} s{line}); every value must "
                               "be finite: repair or cut the recording")


# --------------------------------------------------------------------------- read_run
def _wanted(channels: Sequence[str] | None, meta: Sidecar | None,
            fmt: RunFormat) -> tuple[str, ...] | None:
    """Names of the channels to read: ``channels=``, else (for formats that read channels by
    name) the sidecar's channel list; the sidecar's tacho channel is added when named apart."""
    if channels is not None:
        if isinstance(channels, str) or not all(isinstance(c, str) and c for c in channels) \
                or not channels:
            raise InputError(describe("channels", channels, "must be a non-empty list of "
                                      "channel names"))
        names = list(dict.fromkeys(channels))
    elif fmt.selects_channels and meta and meta.channels:
        names = [c.name for c in meta.channels]
    else:
        return None
    t = meta.tacho_channel if meta else None
    if isinstance(t, str) and not t.strip().isdigit() and t not in names:
        names.append(t)
    return tuple(names)


def _merge_channels(path: Path, found, meta: Sidecar | None, meta_name: str | None,
                    n_ch: int, by_name: bool) -> list[Channel]:
    """The run's channels from what the file says and what the sidecar says."""
    if meta and meta.channels and by_name:
        listed = {c.name: c for c in meta.channels}
        channels = []
        for i, name in enumerate(found.names):
            unit = found.units[i] if found.units else ""
            c = listed.get(name)
            if c is None:
                channels.append(Channel(name, unit))
                continue
            if unit and c.unit and unit != c.unit:
                raise RunFileError(f"{meta_name}: channel '{c.name}' has unit {c.unit!r} but "
                                   f"{path} says {unit!r}; make them agree")
            channels.append(Channel(c.name, c.unit or unit, c.sensitivity) if unit and not c.unit
                            else c)
        return channels
    if meta and meta.channels:
        if len(meta.channels) != n_ch:
            raise RunFileError(f"{meta_name}: lists {len(meta.channels)} channel(s) but {path} "
                               f"holds {n_ch}; list one entry per channel, in file order")
        channels = list(meta.channels)
        if found.names is not None:
            for i, (c, name) in enumerate(zip(channels, found.names)):
                if c.name != name:
                    raise RunFileError(f"{meta_name}: channel {i + 1} is named {c.name!r} but "
                                       f"{path} names it {name!r}; use the same name in both")
        if found.units is not None:
            for i, (c, unit) in enumerate(zip(channels, found.units)):
                if unit and c.unit and unit != c.unit:
                    raise RunFileError(f"{meta_name}: channel '{c.name}' has unit {c.unit!r} but "
                                       f"{path}'s units row says {unit!r}; make them agree")
                if unit and not c.unit:
                    channels[i] = Channel(c.name, unit, c.sensitivity)
        return channels
    names = found.names or [f"ch{i + 1}" for i in range(n_ch)]
    units = found.units or [""] * n_ch
    return [Channel(n, u) for n, u in zip(names, units)]


def read_run(path: str | os.PathLike, *, rate_hz: float | None = None,
             sidecar: str | os.PathLike | Sidecar | None = None,
             channels: Sequence[str] | None = None) -> Run:
    """Read a run file and its sidecar.

    Parameters
    ----------
    path : path-like
        A file of a registered format (:func:`workbench.runs.formats.known_suffixes`):
        ``.wav``, ``.csv``, ``.npz``, ``.mat``, ``.mf4``, ``.h5`` or ``.hdf5``.
    rate_hz : float, optional
        Sample rate in Hz for files that carry none (MAT, CSV without a time column); where the
        file or sidecar gives one too, they must agree.
    sidecar : path-like or Sidecar, optional
        Metadata; by default ``path`` with extension ``.json``, used when it exists.
    channels : sequence of str, optional
        Names of the channels to keep, in this order (the sidecar's tacho channel is kept too).
        MDF4 and HDF5 read only these (an MDF4 file with channels at several rates needs them,
        or the sidecar's channel list, to name channels sampled together); the other formats
        read the file and keep these rows.  Default: every channel.

    Returns
    -------
    Run
        ``source`` is ``path``; the log's first entry ("read") records the format, the sidecar
        and what the reader noticed (units row, MAT scalars such as a published rpm, ignored
        variables, a transposed array, the MDF4 groups or HDF5 layout read).

    Raises
    ------
    RunFileError
        Unknown extension (the message lists the known ones), unreadable or invalid file or
        sidecar, no rate or conflicting rates, a channel count differing between file and
        sidecar, conflicting names or units, a channel asked for that the file lacks, or a
        non-finite value (channel and time named).

    Notes
    -----
    WAV: int16, int32 and float files are memory-mapped (``run.data`` is a read-only
    :class:`numpy.memmap`); int24 files are converted to float32 in chunks.  NPZ: ``data`` of
    shape (channels, samples); a 2-D array is taken as (samples, channels) and transposed when
    ``channel_names`` (or the sidecar's channel list) matches its second axis only, or, with no
    names, when it has more rows than columns (recordings have more samples than channels).
    MAT: every numeric vector of the largest common length becomes a channel named after its
    variable; scalars (e.g. ``X105RPM``) are recorded in the log.  Integer NPZ, MAT, MDF4 and
    HDF5 arrays are values and are converted to float64 unscaled.  MDF4 and HDF5: see
    :mod:`workbench.runs.formats.mdf4` and :mod:`workbench.runs.formats.hdf5`.  Float data are
    scanned once for NaN and inf in chunks (the file is read once; memory does not grow with it).
    """
    path = Path(path)
    ext = path.suffix.lower()
    fmt = format_for(path)
    if fmt is None:
        from workbench.machine.filekind import wrong_file_hint

        hint = wrong_file_hint(path, "run") if path.is_file() else ""
        if hint:
            raise RunFileError(f"{path}: {hint}")
        reader_for(path)  # raises, listing the known suffixes
    if path.is_dir():
        raise RunFileError(f"{path}: is a folder; give a run file ({', '.join(known_suffixes())})")
    if not path.is_file():
        raise RunFileError(f"{path}: no such file")
    if path.stat().st_size == 0:
        raise RunFileError(f"{path}: is empty (0 bytes)")
    if rate_hz is not None:
        check_rate(None, "rate_hz", rate_hz)
    if isinstance(sidecar, Sidecar):
        meta: Sidecar | None = sidecar
    elif sidecar is not None:
        meta = read_sidecar(sidecar)
    else:
        default = sidecar_path(path)
        meta = read_sidecar(default) if default.is_file() else None
    meta_name = (meta.source or "the sidecar") if meta else None
    n_meta = len(meta.channels) if meta and meta.channels else None

    wanted = _wanted(channels, meta, fmt)
    found = fmt.reader(path, ReadRequest(n_channels=n_meta,
                                         channels=wanted if fmt.selects_channels else None))
    data = found.data
    n_ch = data.shape[0]

    rates = []
    if found.rate_hz is not None:
        rates.append((f"the {ext[1:].upper()} file", found.rate_hz))
    if meta and meta.rate_hz is not None:
        rates.append((str(meta_name), meta.rate_hz))
    if rate_hz is not None:
        rates.append(("--rate (rate_hz=)", float(rate_hz)))
    rate = agreed_rate(path, rates)

    chans = _merge_channels(path, found, meta, meta_name, n_ch, found.selected)
    names = [c.name for c in chans]
    if wanted is not None and not found.selected:
        missing = [w for w in wanted if w not in names]
        if missing:
            raise RunFileError(f"{path}: no channel named {', '.join(repr(m) for m in missing)}; "
                               f"the run's channels: {', '.join(names)}")
        rows = [names.index(w) for w in wanted]
        contiguous = rows == list(range(rows[0], rows[0] + len(rows)))
        data = data[rows[0]:rows[0] + len(rows)] if contiguous else np.ascontiguousarray(data[rows])
        chans = [chans[r] for r in rows]
        names = list(wanted)
        n_ch = len(rows)

    tacho = None
    machine = None
    ppr, missing_pulses = 1, 0
    if meta:
        ppr, missing_pulses = meta.pulses_per_rev, meta.missing_pulses
        t = meta.tacho_channel
        if t is not None:
            index = int(t) if isinstance(t, int) or t.strip().isdigit() else None
            if index is not None and not 1 <= index <= n_ch:
                raise RunFileError(f"{meta_name}: tacho_channel {t!r} is out of range; {path} "
                                   f"has channels 1 to {n_ch}")
            if index is None and t not in names:
                raise RunFileError(f"{meta_name}: tacho_channel {t!r} is not a channel of {path} "
                                   f"({', '.join(names)})")
            tacho = names[index - 1] if index is not None else t
        if meta.machine_file is not None:
            machine = str(meta.machine_path)

    check_finite(data, names, rate, str(path), line_of=found.line_of)
    notes = {"file": str(path), "format": ext[1:], "sidecar": meta.source if meta else None}
    notes.update(found.notes)
    if wanted is not None:
        notes["channels_read"] = list(names)
    run = Run(data, rate, tuple(chans), tacho=tacho, pulses_per_rev=ppr,
              missing_pulses=missing_pulses, machine_file=machine, source=str(path))
    return run.with_log("read", notes)


# --------------------------------------------------------------------------- write_run
def sidecar_for_run(run: Run, path: str | os.PathLike, *, notes: Any = None) -> Sidecar:
    """The sidecar describing ``run`` when written to ``path``.

    Parameters
    ----------
    run : Run
        The run (channels, rate, tacho, wheel, machine file).
    path : path-like
        Where the run file will be written.
    notes : any JSON value, optional
        Free-form notes.

    Returns
    -------
    Sidecar
        ``machine_file`` relative to the run file's folder when the machine file lies inside
        it; otherwise left out, with a :class:`FoldlineWarning`.
    """
    path = Path(path)
    machine = None
    if run.machine_file is not None:
        folder = path.parent.resolve()
        target = Path(run.machine_file).resolve()
        if target.is_relative_to(folder):
            machine = target.relative_to(folder).as_posix()
        else:
            warnings.warn(f"{path}: machine file {run.machine_file} lies outside the output "
                          "folder and is not recorded in the sidecar (sidecar paths stay inside "
                          "their folder); copy it beside the run to keep the link",
                          FoldlineWarning, stacklevel=3)
    return Sidecar(channels=run.channels, rate_hz=run.rate_hz, tacho_channel=run.tacho,
                   pulses_per_rev=run.pulses_per_rev, missing_pulses=run.missing_pulses,
                   machine_file=machine, notes=notes)


def write_run(run: Run, path: str | os.PathLike, *, force: bool = False,
              sample_format: str = "float32", notes: Any = None) -> Path:
    """Write a run as a WAV or NPZ file plus its JSON sidecar.

    The WAV file is streamed in chunks of 65,536 samples (a memory-mapped run is never loaded
    whole); both files are written under temporary names and renamed into place only when
    complete.

    Parameters
    ----------
    run : Run
        The run.
    path : path-like
        ``.wav`` or ``.npz`` file; the sidecar goes beside it with extension ``.json``.
    force : bool, optional
        Overwrite existing files (the run file and the sidecar).
    sample_format : {"float32", "int16", "int24", "int32"}, optional
        WAV sample format.  Raw values are stored as fractions of full scale, so for the integer
        formats every raw value must lie in [-1, 1].  NPZ keeps the data's float dtype (integer
        PCM codes become float64 full-scale fractions).
    notes : any JSON value, optional
        Written to the sidecar's ``notes``.

    Returns
    -------
    Path
        The run file.

    Raises
    ------
    RunFileError
        Extension other than .wav or .npz.
    OutputExistsError
        The run file or its sidecar exists and ``force`` is false.
    InputError
        A rate that is not a whole number (WAV), or values out of range for an integer format.
    """
    path = Path(path)
    writer = writer_for(path)
    side = sidecar_path(path)
    check_writable(path, force=force)
    check_writable(side, force=force)
    meta = sidecar_for_run(run, path, notes=notes)
    with atomic_output(side, force=force) as side_tmp:
        write_sidecar(meta, side_tmp, force=True)
        writer(run, path, force=force, sample_format=sample_format)
    return path
