"""Run-file formats as plug-ins: one module per format, found by the file's suffix.

Each format is a module with a reader ``read(path, request) -> FormatRead`` and, where foldline
writes the format, a writer ``write(run, path, *, force, sample_format)`` (see
:mod:`workbench.runs.formats.base`).  :func:`register_format` adds a format to the registry
:data:`FORMATS`; :func:`workbench.runs.read_run` and :func:`workbench.runs.write_run` look the
file's suffix up with :func:`format_for`, :func:`reader_for` and :func:`writer_for`.  The
design follows the format plug-ins of ObsPy (Beyreuther et al. 2010, "ObsPy: A Python Toolbox
for Seismology", Seismological Research Letters 81(3)), where each waveform format registers a
reader and a writer and one ``read`` dispatches to them.

Built-in formats (described for users in ``docs/run-file-formats.md``):

======  =================  ======  ================================================
name    suffixes           writer  module
======  =================  ======  ================================================
wav     .wav               yes     :mod:`~workbench.runs.formats.wav`
csv     .csv               no      :mod:`~workbench.runs.formats.csv`
npz     .npz               yes     :mod:`~workbench.runs.formats.npz`
mat     .mat               no      :mod:`~workbench.runs.formats.mat`
mdf4    .mf4               no      :mod:`~workbench.runs.formats.mdf4` (asammdf)
hdf5    .h5, .hdf5         no      :mod:`~workbench.runs.formats.hdf5` (h5py)
======  =================  ======  ================================================

The MDF4 and HDF5 readers import asammdf and h5py when they read, never at import.

Adding a format::

    from workbench.runs.formats import register_format
    register_format((".xyz",), read_xyz, name="xyz")   # read_xyz(path, request) -> FormatRead
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path

from workbench.errors import InputError, RunFileError
from workbench.runs.formats.base import FormatRead, ReadRequest

__all__ = ["RunFormat", "FORMATS", "register_format", "format_for", "reader_for", "writer_for",
           "known_suffixes", "writable_suffixes", "FormatRead", "ReadRequest"]

Reader = Callable[[Path, ReadRequest], FormatRead]
Writer = Callable[..., None]


@dataclass(frozen=True)
class RunFormat:
    """One run-file format.

    Parameters
    ----------
    name : str
        Short name (``"wav"``, ``"mdf4"``).
    suffixes : tuple of str
        File suffixes in lower case with the dot (``(".h5", ".hdf5")``).
    reader : callable
        ``reader(path, request) -> FormatRead``.
    writer : callable, optional
        ``writer(run, path, *, force, sample_format) -> None``; writes the data file only.
    selects_channels : bool, optional
        The reader honours :attr:`ReadRequest.channels` by name (reads only those channels);
        the sidecar's channel list then picks channels by name instead of describing every
        channel in file order.
    """

    name: str
    suffixes: tuple[str, ...]
    reader: Reader
    writer: Writer | None = None
    selects_channels: bool = False


#: Registered formats by name, in registration order.
FORMATS: dict[str, RunFormat] = {}


def register_format(suffixes: str | Iterable[str], reader: Reader, writer: Writer | None = None,
                    *, name: str, selects_channels: bool = False) -> RunFormat:
    """Register a run-file format.

    Parameters
    ----------
    suffixes : str or iterable of str
        Suffixes with the dot (``".h5"``); compared in lower case.
    reader : callable
        ``reader(path, request) -> FormatRead``.
    writer : callable, optional
        ``writer(run, path, *, force, sample_format) -> None``.
    name : str
        Short name of the format.
    selects_channels : bool, optional
        See :class:`RunFormat`.

    Returns
    -------
    RunFormat

    Raises
    ------
    InputError
        A suffix without a leading dot, no suffix, a name already registered, or a suffix
        another format already reads.
    """
    items = (suffixes,) if isinstance(suffixes, str) else tuple(suffixes)
    sufs = tuple(s.lower() for s in items)
    if not sufs or any(not isinstance(s, str) or not s.startswith(".") or len(s) < 2
                       for s in sufs):
        raise InputError(f"format {name!r}: suffixes {items!r} are not valid; give one or more "
                         "suffixes starting with a dot, e.g. '.h5'")
    if name in FORMATS:
        raise InputError(f"format {name!r} is registered already")
    for other in FORMATS.values():
        taken = set(sufs) & set(other.suffixes)
        if taken:
            raise InputError(f"format {name!r}: suffix {sorted(taken)[0]} is read by format "
                             f"{other.name!r} already")
    fmt = RunFormat(name, sufs, reader, writer, selects_channels)
    FORMATS[name] = fmt
    return fmt


def known_suffixes() -> tuple[str, ...]:
    """Every suffix a registered format reads, in registration order."""
    return tuple(s for f in FORMATS.values() for s in f.suffixes)


def writable_suffixes() -> tuple[str, ...]:
    """Every suffix a registered format writes, in registration order."""
    return tuple(s for f in FORMATS.values() if f.writer is not None for s in f.suffixes)


def format_for(path: str | os.PathLike) -> RunFormat | None:
    """The format that reads ``path`` (by its suffix, any case), or None."""
    ext = Path(path).suffix.lower()
    return next((f for f in FORMATS.values() if ext in f.suffixes), None)


def reader_for(path: str | os.PathLike) -> Reader:
    """The reader of ``path``'s format.

    Raises
    ------
    RunFileError
        No registered format has that suffix; the message lists the known suffixes.
    """
    fmt = format_for(path)
    if fmt is None:
        ext = Path(path).suffix.lower()
        raise RunFileError(f"{path}: extension {ext or '(none)'!r} is not a run file format; "
                           f"allowed: {', '.join(known_suffixes())}")
    return fmt.reader


def writer_for(path: str | os.PathLike) -> Writer:
    """The writer of ``path``'s format.

    Raises
    ------
    RunFileError
        No registered format writes that suffix; the message lists the writable suffixes.
    """
    fmt = format_for(path)
    if fmt is None or fmt.writer is None:
        ext = Path(path).suffix.lower()
        raise RunFileError(f"{path}: cannot write extension {ext or '(none)'!r}; allowed: "
                           f"{', '.join(writable_suffixes())}")
    return fmt.writer


def _register_builtins() -> None:
    from workbench.runs.formats import csv, hdf5, mat, mdf4, npz, wav

    register_format(".wav", wav.read, wav.write, name="wav")
    register_format(".csv", csv.read, name="csv")
    register_format(".npz", npz.read, npz.write, name="npz")
    register_format(".mat", mat.read, name="mat")
    register_format(".mf4", mdf4.read, name="mdf4", selects_channels=True)
    register_format((".h5", ".hdf5"), hdf5.read, name="hdf5", selects_channels=True)


_register_builtins()
