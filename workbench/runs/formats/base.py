"""What every run-file format plug-in shares: the request it is given, the result it returns,
and the rules for sample rates (agreement of several sources, a uniform time base).

A format's reader is a function ``reader(path, request) -> FormatRead``; its writer (where the
format has one) is ``writer(run, path, *, force, sample_format) -> None`` and writes the data file
only (the sidecar is written by :func:`workbench.runs.write_run`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from workbench.errors import RunFileError

__all__ = ["FormatRead", "ReadRequest", "agreed_rate", "uniform_rate", "whole_rate",
           "RATE_RTOL", "GRID_TOLERANCE", "TIME_NAMES"]

#: Relative tolerance within which two sources of a sample rate agree (a rate computed from
#: printed or stored times is only as exact as those times).
RATE_RTOL = 1e-6
#: Largest deviation of a stored time stamp from the uniform grid ``t0 + i / rate``, as a
#: fraction of the sample period, for a binary time base (MDF4 master channel, HDF5 ``time``
#: dataset) to count as uniformly sampled.  At this limit the timing error of a line at 0.4 x the
#: sample rate is 360 deg x 0.4 x 0.01 = 1.4 deg of phase (common practice, no source).
GRID_TOLERANCE = 0.01
#: Names of a time column (CSV) or time dataset (HDF5), compared in lower case.
TIME_NAMES = ("time_s", "time", "t")


@dataclass(frozen=True)
class ReadRequest:
    """What :func:`~workbench.runs.read_run` asks of a format's reader.

    Parameters
    ----------
    n_channels : int, optional
        Channels the sidecar lists (NPZ uses it to orient a 2-D array).
    channels : tuple of str, optional
        Names of the channels to read, in this order.  Formats that read channels by name
        (MDF4, HDF5) read only these; the others read every channel and leave the choice to
        ``read_run``.  None: every channel.
    """

    n_channels: int | None = None
    channels: tuple[str, ...] | None = None


@dataclass(frozen=True)
class FormatRead:
    """What one format's reader found in a file.

    Parameters
    ----------
    data : ndarray, shape (n_channels, n_samples)
        Raw values (integer arrays are PCM codes, see :mod:`workbench.runs.run`); may be a
        read-only :class:`numpy.memmap`.
    rate_hz : float, optional
        Sample rate the file gives, in Hz.
    names, units : list of str, optional
        Channel names and units the file gives, one per row.
    notes : dict, optional
        What the reader noticed, for the run's log.
    line_of : callable, optional
        Maps a 0-based sample index to a 1-based line of a text file (for messages).
    selected : bool, optional
        True when the reader has read exactly the channels of ``ReadRequest.channels``.
    """

    data: np.ndarray
    rate_hz: float | None = None
    names: list[str] | None = None
    units: list[str] | None = None
    notes: dict[str, Any] = field(default_factory=dict)
    line_of: Callable[[int], int] | None = None
    selected: bool = False


def whole_rate(rate: float) -> float:
    """``rate`` rounded to a whole number of Hz when it is one but for float noise."""
    if rate > 0.5 and abs(rate - round(rate)) <= 1e-9 * rate:
        return float(round(rate))
    return float(rate)


def agreed_rate(path: Path | str, found: Sequence[tuple[str, float]]) -> float:
    """The one sample rate several sources give.

    Parameters
    ----------
    path : path-like
        The run file (for the messages).
    found : sequence of (source, rate in Hz)
        Each source that gives a rate, e.g. ``("the WAV file", 12800.0)``.

    Returns
    -------
    float
        The first source's rate.

    Raises
    ------
    RunFileError
        No source, or two that differ by more than :data:`RATE_RTOL` relative.
    """
    if not found:
        raise RunFileError(f"{path}: the file gives no sample rate; pass --rate (rate_hz=) or set "
                           "\"rate_hz\" in the sidecar")
    first = found[0][1]
    for _, value in found[1:]:
        if abs(value - first) > RATE_RTOL * first:
            said = "; ".join(f"{n} says {v:.10g} Hz" for n, v in found)
            raise RunFileError(f"{path}: sample rates disagree ({said}); remove or correct the "
                               "wrong one")
    return first


def uniform_rate(time_s: np.ndarray, where: str) -> tuple[float, float]:
    """Sample rate and start of a stored binary time base, refused unless uniform.

    Parameters
    ----------
    time_s : ndarray, shape (n,)
        Time stamps in s (an MDF4 master channel, an HDF5 ``time`` dataset).
    where : str
        What holds them, for the messages (``"run.mf4, group 0 (time)"``).

    Returns
    -------
    rate_hz : float
        ``(n - 1) / (t[-1] - t[0])``, rounded to whole Hz when within float noise of it.
    start_s : float
        ``t[0]``.

    Raises
    ------
    RunFileError
        Fewer than two stamps, stamps not increasing, or a stamp farther than
        :data:`GRID_TOLERANCE` sample periods from the uniform grid (the message names the
        sample, its time and its deviation).
    """
    t = np.asarray(time_s, dtype=np.float64).reshape(-1)
    if t.size < 2:
        raise RunFileError(f"{where}: {t.size} time stamp(s); two or more are needed to give a "
                           "rate (or set \"rate_hz\" in the sidecar)")
    if not (np.isfinite(t[0]) and np.isfinite(t[-1])):
        raise RunFileError(f"{where}: the first or last time stamp is not finite")
    dt = (t[-1] - t[0]) / (t.size - 1)
    if not dt > 0:
        raise RunFileError(f"{where}: the time stamps do not increase (first {t[0]} s, last "
                           f"{t[-1]} s)")
    worst, worst_at = 0.0, 0
    for a in range(0, t.size, 1 << 20):  # in blocks: no second array as long as the record
        grid = t[0] + dt * np.arange(a, min(a + (1 << 20), t.size), dtype=np.float64)
        dev = np.abs(t[a:a + grid.size] - grid)
        if not np.isfinite(dev).all():
            k = a + int(np.argmin(np.isfinite(dev)))
            raise RunFileError(f"{where}: time stamp {k + 1} is not finite")
        k = int(np.argmax(dev))
        if dev[k] > worst:
            worst, worst_at = float(dev[k]), a + k
    if worst > GRID_TOLERANCE * dt:
        raise RunFileError(
            f"{where}: not uniformly sampled: sample {worst_at + 1} (t = {t[worst_at]:.9g} s) lies "
            f"{worst / dt:.3g} sample periods from the uniform grid of {1 / dt:.9g} Hz (allowed: "
            f"{GRID_TOLERANCE:g}); resample the channels to a fixed rate before export")
    rate = whole_rate(1.0 / dt)
    if not math.isfinite(rate):
        raise RunFileError(f"{where}: the time stamps give no finite rate")
    return rate, float(t[0])
