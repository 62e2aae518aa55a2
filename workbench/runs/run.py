"""The run: a recorded (or simulated) acquisition held as channels x samples.

A :class:`Run` never copies its data.  ``data`` may be a read-only :class:`numpy.memmap` over a
WAV file, so a recording larger than memory can still be opened; :meth:`Run.iter_chunks` streams
one channel in physical units without reading the rest.

Units
-----
``data`` holds *raw* values, exactly as stored:

* integer arrays (``int16``, ``int32``: memory-mapped PCM codes) are fractions of full scale once
  divided by ``2**(bits - 1)`` (32768 for int16, 2**31 for int32), so raw values lie in [-1, 1);
* floating-point arrays are raw values as they are (a WAV float file, a CSV column, an NPZ array).

:attr:`Channel.sensitivity` is the transducer sensitivity in *raw units per physical unit*
(for a voltage recording of an accelerometer, V per m/s^2; for a WAV file, fraction of full scale
per physical unit).  :meth:`Run.channel` therefore returns ``raw / sensitivity`` in
:attr:`Channel.unit`.  The default sensitivity 1.0 means the stored values are already physical.
"""

from __future__ import annotations

import mmap

import dataclasses
import datetime as _dt
import numbers
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from workbench.checks import FieldError, positive, positive_int, rate_hz, show
from workbench.errors import InputError

__all__ = ["Channel", "Run", "LogEntry", "full_scale", "log_entry", "describe_log_entry"]

#: One processing-log entry: (ISO 8601 timestamp, action, parameters).
LogEntry = tuple[str, str, Mapping[str, Any]]


def full_scale(dtype: np.dtype) -> float:
    """Divisor that turns raw values of ``dtype`` into fractions of full scale.

    Parameters
    ----------
    dtype : numpy dtype
        Dtype of :attr:`Run.data`.

    Returns
    -------
    float
        ``2**(bits - 1)`` for signed integer dtypes (PCM codes), 1.0 for floating-point dtypes.
    """
    dtype = np.dtype(dtype)
    if dtype.kind == "i":
        return float(2 ** (8 * dtype.itemsize - 1))
    if dtype.kind == "f":
        return 1.0
    raise InputError(f"run data of dtype {dtype} is not supported; allowed: signed integers "
                     "(PCM codes) or floating point")


def _is_int(value: Any) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


def release_pages(data: np.ndarray, before: int) -> None:
    """Let go of the mapped file pages that hold samples before index ``before``.

    Pages of a memory-mapped file stay in the process's resident memory once read; a long
    record streamed chunk by chunk would otherwise end up wholly resident.  The pages stay in
    the system's file cache, so reading them again costs no disk access.  Does nothing for
    data that is not memory-mapped.

    Parameters
    ----------
    data : ndarray, shape (n_channels, n_samples)
        Run data (a view of a :class:`numpy.memmap` over an interleaved file, or any array).
    before : int
        Samples before this index may be released.
    """
    mm = getattr(data, "_mmap", None)
    if mm is None or not hasattr(mm, "madvise") or not hasattr(mmap, "MADV_DONTNEED"):
        return
    first = int(getattr(data, "offset", 0)) % mmap.ALLOCATIONGRANULARITY
    end = (first + int(before) * abs(int(data.strides[-1]))) // mmap.PAGESIZE * mmap.PAGESIZE
    if end > 0:
        mm.madvise(mmap.MADV_DONTNEED, 0, min(end, len(mm)))


@dataclass(frozen=True)
class Channel:
    """One channel of a run.

    Parameters
    ----------
    name : str
        Channel name, unique within a run (e.g. ``"vibration"``, ``"tacho"``, ``"X105_DE_time"``).
    unit : str, optional
        Physical unit after dividing by the sensitivity (``"m/s^2"``, ``"g"``, ``"V"``); empty when
        unknown.
    sensitivity : float, optional
        Raw units per physical unit, > 0 (e.g. 0.01 for a 10 mV per m/s^2 accelerometer recorded
        in volts).  Physical value = raw value / sensitivity.  Default 1.0.
    """

    name: str
    unit: str = ""
    sensitivity: float = 1.0

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise FieldError("Channel", "name", "must be a non-empty string", self.name)
        if not isinstance(self.unit, str):
            raise FieldError(f"channel '{self.name}'", "unit", "must be a string", self.unit)
        object.__setattr__(self, "sensitivity", positive(
            f"channel '{self.name}'", "sensitivity", self.sensitivity,
            unit="raw units per physical unit"))


def _now_iso() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def log_entry(action: str, parameters: Mapping[str, Any] | None = None, **more) -> LogEntry:
    """One processing-log entry stamped now: ``(ISO 8601 UTC timestamp, action, parameters)``.

    The one shape of every log in the project: a run's (reading it, filters applied) and every
    result made from it (:class:`~workbench.runs.analysis.RunAnalysis` carries the run's entries
    and then its own stages').  A human-readable sentence goes in the ``note`` parameter.
    """
    return _as_log_entry(str(action), {**dict(parameters or {}), **more})


def describe_log_entry(entry: LogEntry) -> str:
    """One line of text for a log entry: ``action: note (key=value, ...)``."""
    _stamp, action, params = _as_log_entry(entry, None) if not isinstance(entry, str) else ("", entry, {})
    params = dict(params)
    note = params.pop("note", None)
    text = str(action) + (f": {note}" if note else "")
    rest = ", ".join(f"{k}={v}" for k, v in params.items() if v is not None)
    return text + (f" ({rest})" if rest else "")


def _as_log_entry(entry: Any, parameters: Mapping[str, Any] | None) -> LogEntry:
    if isinstance(entry, str):
        return (_now_iso(), entry, dict(parameters or {}))
    if parameters is not None:
        raise InputError("with_log: give parameters either inside the entry tuple or as the "
                         "second argument, not both")
    if isinstance(entry, tuple) and len(entry) == 2:
        action, params = entry
        return _as_log_entry(action, params)
    if isinstance(entry, tuple) and len(entry) == 3:
        stamp, action, params = entry
        if not isinstance(stamp, str) or not isinstance(action, str) or not isinstance(
                params, Mapping):
            raise InputError(f"log entry = {show(entry)}: must be (timestamp str, action str, "
                             "parameters mapping)")
        return (stamp, action, dict(params))
    raise InputError(f"log entry = {show(entry)}: must be an action string, (action, "
                     "parameters) or (timestamp, action, parameters)")


@dataclass(frozen=True, eq=False)
class Run:
    """A recorded or simulated acquisition.

    Parameters
    ----------
    data : ndarray, shape (n_channels, n_samples)
        Raw values, time on the last axis (see the module notes on units).  Never copied: a
        read-only :class:`numpy.memmap` stays one.  A 1-D array is taken as one channel (a view).
    rate_hz : float
        Sample rate in Hz, > 0.
    channels : sequence of Channel or str
        One entry per row of ``data``; a string is a channel name with no unit and sensitivity 1.
    tacho : str or int, optional
        The tacho channel: a name, or a 1-based index (int or digit string).  Stored as the name.
    pulses_per_rev : int, optional
        Tooth positions per revolution of the tacho wheel, counting missing ones (60-2 wheel: 60).
    missing_pulses : int, optional
        Consecutive missing tooth positions (60-2 wheel: 2); 0 <= missing_pulses < pulses_per_rev.
    machine_file : str, optional
        Path of the machine file the run belongs to.
    source : str, optional
        File the run was read from.
    log : tuple of (str, str, dict), optional
        Processing log, oldest first: (ISO 8601 UTC timestamp, action, parameters), as in ObsPy's
        processing history.  Add to it with :meth:`with_log`.
    """

    data: np.ndarray
    rate_hz: float
    channels: tuple[Channel, ...]
    tacho: str | None = None
    pulses_per_rev: int = 1
    missing_pulses: int = 0
    machine_file: str | None = None
    source: str | None = None
    log: tuple[LogEntry, ...] = field(default=())

    def __post_init__(self) -> None:
        data = self.data
        if not isinstance(data, np.ndarray):
            raise InputError(f"run data must be a numpy array, not {type(data).__name__}")
        if data.ndim == 1:
            data = data.reshape(1, -1)
        if data.ndim != 2:
            raise InputError(f"run data has shape {data.shape}; allowed: (n_channels, n_samples)")
        full_scale(data.dtype)  # rejects unsupported dtypes
        object.__setattr__(self, "data", data)
        object.__setattr__(self, "rate_hz", rate_hz(None, "rate_hz", self.rate_hz))
        if isinstance(self.channels, (str, Channel)) or not isinstance(self.channels, Sequence):
            raise InputError("channels must be a sequence of Channel objects or names")
        chans = tuple(c if isinstance(c, Channel) else Channel(c) for c in self.channels)
        if len(chans) != data.shape[0]:
            raise InputError(f"{len(chans)} channel(s) given for data with {data.shape[0]} rows; "
                             "give one channel per row of data")
        names = [c.name for c in chans]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise InputError(f"channel names must be unique; repeated: {', '.join(dup)}")
        object.__setattr__(self, "channels", chans)
        ppr = positive_int(None, "pulses_per_rev", self.pulses_per_rev, whole_float=False,
                           what="tooth positions per revolution, missing ones included")
        object.__setattr__(self, "pulses_per_rev", ppr)
        object.__setattr__(self, "missing_pulses", positive_int(
            None, "missing_pulses", self.missing_pulses, low=0, high=ppr - 1, whole_float=False,
            what="pulses_per_rev - 1 at most"))
        if self.tacho is not None:
            object.__setattr__(self, "tacho", chans[self.channel_index(self.tacho)].name)
        for name in ("machine_file", "source"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, str(value))
        object.__setattr__(self, "log", tuple(_as_log_entry(e, None) for e in self.log))

    # ----------------------------------------------------------------- derived values
    @property
    def n_channels(self) -> int:
        """Number of channels."""
        return int(self.data.shape[0])

    @property
    def n_samples(self) -> int:
        """Number of samples per channel."""
        return int(self.data.shape[1])

    @property
    def duration_s(self) -> float:
        """Length of the run in s: ``n_samples / rate_hz``."""
        return self.n_samples / self.rate_hz

    @property
    def nyquist_hz(self) -> float:
        """Nyquist frequency in Hz: ``rate_hz / 2``."""
        return self.rate_hz / 2.0

    @property
    def time_s(self) -> np.ndarray:
        """Sample instants in s, shape (n_samples,), computed on each access (not stored)."""
        return np.arange(self.n_samples, dtype=np.float64) / self.rate_hz

    @property
    def channel_names(self) -> tuple[str, ...]:
        """Channel names in order."""
        return tuple(c.name for c in self.channels)

    @property
    def tacho_index(self) -> int | None:
        """0-based row of the tacho channel in :attr:`data`, or None."""
        return None if self.tacho is None else self.channel_names.index(self.tacho)

    # ----------------------------------------------------------------- access
    def channel_index(self, ch: int | str) -> int:
        """0-based row of a channel.

        Parameters
        ----------
        ch : int or str
            A 1-based index (int, or a string of digits) or a channel name.

        Returns
        -------
        int
            Row of :attr:`data`.

        Raises
        ------
        InputError
            Unknown name or index out of range; the message lists the channels.
        """
        names = self.channel_names
        listing = ", ".join(f"{i + 1}={n!r}" for i, n in enumerate(names))
        if isinstance(ch, str) and ch in names:
            return names.index(ch)
        if isinstance(ch, str) and ch.strip().isdigit():
            ch = int(ch.strip())
        if _is_int(ch):
            if 1 <= ch <= len(names):
                return int(ch) - 1
            raise InputError(f"channel {ch} is out of range; channels are numbered from 1: "
                             f"{listing}")
        raise InputError(f"channel {ch!r} not found; available: {listing}")

    def channel(self, ch: int | str) -> np.ndarray:
        """One channel in physical units.

        Parameters
        ----------
        ch : int or str
            1-based index or name (see :meth:`channel_index`).

        Returns
        -------
        ndarray of float64, shape (n_samples,)
            ``raw / full_scale / sensitivity``, a new array in :attr:`Channel.unit`.
        """
        i = self.channel_index(ch)
        return self._physical(i, 0, self.n_samples)

    def _physical(self, i: int, start: int, stop: int) -> np.ndarray:
        scale = 1.0 / (full_scale(self.data.dtype) * self.channels[i].sensitivity)
        out = np.array(self.data[i, start:stop], dtype=np.float64)  # always a new array
        if scale != 1.0:
            out *= scale
        return out

    def iter_chunks(self, ch: int | str, chunk_samples: int, overlap: int = 0
                    ) -> Iterator[np.ndarray]:
        """Stream one channel in physical units, chunk by chunk.

        Parameters
        ----------
        ch : int or str
            1-based index or name.
        chunk_samples : int
            Samples per chunk, >= 1.  The last chunk may be shorter.
        overlap : int, optional
            Samples shared by consecutive chunks, 0 <= overlap < chunk_samples; chunk k starts at
            ``k * (chunk_samples - overlap)``.

        Yields
        ------
        ndarray of float64, shape (<= chunk_samples,)
            A new array per chunk; only that chunk is read from a memory-mapped file.
        """
        i = self.channel_index(ch)
        positive_int(None, "chunk_samples", chunk_samples, whole_float=False)
        positive_int(None, "overlap", overlap, low=0, high=chunk_samples - 1, whole_float=False,
                     what="chunk_samples - 1 at most")
        step = chunk_samples - overlap
        n = self.n_samples
        start = 0
        while start < n:
            stop = min(start + chunk_samples, n)
            yield self._physical(i, start, stop)
            if stop == n:
                break
            start += step
            release_pages(self.data, start)



    def iter_chunks_many(self, chs, chunk_samples: int, *, dtype=np.float64
                         ) -> Iterator[np.ndarray]:
        """Stream several channels in physical units, chunk by chunk, in one pass over the file.

        Parameters
        ----------
        chs : sequence of int or str
            1-based indices or names (see :meth:`channel_index`).
        chunk_samples : int
            Samples per chunk, >= 1.  The last chunk may be shorter.
        dtype : numpy dtype
            float64 (default) or float32 (half the memory and conversion work, for a consumer
            that works in single precision anyway, such as the order tracker's FFTs).

        Yields
        ------
        ndarray of ``dtype``, shape (len(chs), <= chunk_samples)
            A new array per chunk; with float64, row ``r`` equals the chunk
            :meth:`iter_chunks` gives for ``chs[r]`` (same arithmetic), read together from the
            file.
        """
        rows = [self.channel_index(c) for c in chs]
        if not rows:
            raise InputError("no channel to read; give at least one")
        positive_int(None, "chunk_samples", chunk_samples, whole_float=False)
        fs = full_scale(self.data.dtype)
        scale = np.array([1.0 / (fs * self.channels[i].sensitivity) for i in rows]).astype(dtype)
        n = self.n_samples
        for start in range(0, n, chunk_samples):
            stop = min(start + chunk_samples, n)
            out = np.array(self.data[rows, start:stop], dtype=dtype)
            for r, sc in enumerate(scale):
                if sc != 1.0:
                    out[r] *= sc
            yield out
            release_pages(self.data, stop)

    def with_log(self, entry: str | tuple, parameters: Mapping[str, Any] | None = None) -> Run:
        """A copy of the run with one more processing-log entry (the data is shared, not copied).

        Parameters
        ----------
        entry : str or tuple
            An action name (then stamped with the current UTC time), ``(action, parameters)``, or
            a full ``(timestamp, action, parameters)`` entry.
        parameters : mapping, optional
            Parameters of the action, when ``entry`` is an action name.

        Returns
        -------
        Run
        """
        return dataclasses.replace(self, log=self.log + (_as_log_entry(entry, parameters),))

    def __repr__(self) -> str:
        kind = "memmap" if isinstance(self.data, np.memmap) else "array"
        plural = "" if self.n_channels == 1 else "s"
        return (f"Run({self.n_channels} channel{plural} {list(self.channel_names)}, "
                f"{self.n_samples} samples at {self.rate_hz:g} Hz ({self.duration_s:g} s), "
                f"{self.data.dtype} {kind}, tacho={self.tacho!r})")
