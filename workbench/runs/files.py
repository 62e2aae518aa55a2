"""Reading and writing run files: WAV, CSV, NPZ and MAT, each with an optional JSON sidecar.

:func:`read_run` dispatches on the extension, reads the samples (memory-mapped for WAV where
the sample format allows), merges what the file says with what the sidecar and the caller say,
refuses conflicts, and checks every value is finite.  :func:`write_run` writes a WAV (streamed,
chunk by chunk) or NPZ file and its sidecar, never leaving a partial file.

Where each format gets its rate, channel names and units:

========  ===========================  ==============================  ====================
format    rate                         names                           units
========  ===========================  ==============================  ====================
.wav      header                       sidecar, else ``ch1``, ...       sidecar
.csv      time column, or sidecar /    header row                      units row / sidecar
          ``rate_hz=``
.npz      key ``rate_hz``, or sidecar  key ``channel_names``, sidecar  sidecar
          / ``rate_hz=``
.mat      sidecar / ``rate_hz=``       variable names                  sidecar
========  ===========================  ==============================  ====================

When two of these give a rate (or names, or units) they must agree; a conflict is an error,
never a silent choice.
"""

from __future__ import annotations

import csv
import math
import os
import warnings
import zipfile
import zlib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from workbench.checks import RATE_RULE, describe, rate_hz as check_rate
from workbench.errors import FoldlineWarning, RunFileError
from workbench.fileio import atomic_output, check_writable
from workbench.runs.run import Channel, Run, full_scale, release_pages
from workbench.runs.sidecar import Sidecar, read_sidecar, sidecar_path, write_sidecar
from workbench.runs.wav import WavWriter, read_wav

__all__ = ["RUN_EXTENSIONS", "read_run", "write_run", "check_finite", "sidecar_for_run"]

#: Extensions :func:`read_run` accepts.
RUN_EXTENSIONS = (".wav", ".csv", ".npz", ".mat")
_WRITE_EXTENSIONS = (".wav", ".npz")
_TIME_NAMES = ("time_s", "time", "t")
_CHUNK = 1 << 16
_RATE_RTOL = 1e-6  # rates from a time column are only as exact as the printed times
_TIME_RTOL = 1e-6


class _Read:
    """What one format reader found."""

    def __init__(self, data: np.ndarray, *, rate_hz: float | None = None,
                 names: list[str] | None = None, units: list[str] | None = None,
                 notes: dict[str, Any] | None = None,
                 line_of: Callable[[int], int] | None = None) -> None:
        self.data = data
        self.rate_hz = rate_hz
        self.names = names
        self.units = units
        self.notes = notes or {}
        self.line_of = line_of


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


# --------------------------------------------------------------------------- CSV
def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _read_csv(path: Path) -> _Read:
    try:
        with open(path, newline="", encoding="utf-8-sig") as f:
            first = f.readline()
            f.seek(0)
            delim = next((d for d in (",", ";", "\t") if d in first), ",")
            reader = csv.reader(f, delimiter=delim)
            header = next(reader, None)
            second = next(reader, None)
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise RunFileError(f"{path}: cannot be read as UTF-8 CSV text ({exc})") from exc
    if not header or not any(c.strip() for c in header):
        raise RunFileError(f"{path}: is empty; expected a header row naming the columns, then "
                           "one row per sample")
    header = [c.strip() for c in header]
    numeric = [c for c in header if _is_number(c)]
    if numeric:
        raise RunFileError(f"{path}: line 1 must be a header row naming each column, but holds "
                           f"the number {numeric[0]!r}; add a header row (e.g. time_s,vibration)")
    for j, name in enumerate(header):
        if not name:
            raise RunFileError(f"{path}: line 1, column {j + 1} has no name; name every column")
    dup = sorted({c for c in header if header.count(c) > 1})
    if dup:
        raise RunFileError(f"{path}: line 1 names column(s) {', '.join(dup)} more than once")
    units = None
    if second is not None and len(second) == len(header) and any(c.strip() for c in second) \
            and not any(_is_number(c) for c in second):
        units = [c.strip() for c in second]
    skip = 1 if units else 0
    try:
        df = pd.read_csv(path, sep=delim, header=0, skiprows=[1] if units else None,
                         skip_blank_lines=False, encoding="utf-8-sig", low_memory=False,
                         names=header)
    except (pd.errors.ParserError, ValueError) as exc:
        raise RunFileError(f"{path}: cannot be parsed as CSV ({exc})") from exc

    def line_of(i: int) -> int:
        return i + 2 + skip

    notes: dict[str, Any] = {}
    if units:
        notes["units_row"] = dict(zip(header, units))
    empty = df.isna().all(axis=1).to_numpy()
    n_rows = len(df)
    while n_rows and empty[n_rows - 1]:
        n_rows -= 1
    if n_rows < len(df):
        notes["dropped_empty_lines_at_end"] = len(df) - n_rows
        df = df.iloc[:n_rows]
    if n_rows == 0:
        raise RunFileError(f"{path}: holds no data rows below the header")
    if empty[:n_rows].any():
        i = int(np.argmax(empty[:n_rows]))
        raise RunFileError(f"{path}: line {line_of(i)} is empty; remove it or fill in the values")
    for name in header:
        col = df[name]
        if col.dtype.kind not in "fiu":
            as_num = pd.to_numeric(col, errors="coerce")
            bad = (as_num.isna() & col.notna()).to_numpy()
            if bad.any():
                i = int(np.argmax(bad))
                raise RunFileError(f"{path}: line {line_of(i)}, column '{name}': {col.iloc[i]!r} "
                                   "is not a number")
            df[name] = as_num
    time_cols = [c for c in header if c.lower() in _TIME_NAMES]
    if len(time_cols) > 1:
        raise RunFileError(f"{path}: more than one time column ({', '.join(time_cols)}); keep one "
                           f"named one of {', '.join(_TIME_NAMES)}")
    rate = None
    if time_cols:
        tname = time_cols[0]
        if units and units[header.index(tname)] not in ("", "s"):
            raise RunFileError(f"{path}: line 2, column '{tname}': time unit "
                               f"{units[header.index(tname)]!r} is not supported; allowed: s")
        t = df[tname].to_numpy(dtype=np.float64)
        finite = np.isfinite(t)
        if not finite.all():
            i = int(np.argmin(finite))
            raise RunFileError(f"{path}: line {line_of(i)}, column '{tname}': the time is missing "
                               "or not finite")
        if t.size < 2:
            raise RunFileError(f"{path}: one row only; the time column needs two rows or more to "
                               "give a rate (or drop it and pass --rate)")
        dt = (t[-1] - t[0]) / (t.size - 1)
        if not dt > 0:
            raise RunFileError(f"{path}: column '{tname}' does not increase (first {t[0]} s, last "
                               f"{t[-1]} s)")
        steps = np.diff(t)
        typical = float(np.median(steps))
        bad = np.abs(steps - typical) > _TIME_RTOL * abs(typical)
        if not bad.any():  # the median may be one of two alternating values: check the mean
            bad = np.abs(steps - dt) > _TIME_RTOL * dt
            typical = dt
        if bad.any():
            i = int(np.argmax(bad)) + 1
            raise RunFileError(
                f"{path}: line {line_of(i)}, column '{tname}': time step {steps[i - 1]:.9g} s "
                f"from the line before differs from the usual step {typical:.9g} s by more than "
                f"{_TIME_RTOL:g} relative; the samples must be uniformly spaced (if the times "
                "are only rounded, drop the time column and pass --rate)")
        rate = 1.0 / dt
        if rate > 0.5 and abs(rate - round(rate)) <= 1e-9 * rate:
            rate = float(round(rate))  # float noise of 1 / step, not a different rate
        notes["time_column"] = tname
        if t[0] != 0:
            notes["time_start_s"] = float(t[0])
    names = [c for c in header if c not in time_cols]
    if not names:
        raise RunFileError(f"{path}: has only a time column; add at least one data column")
    data = np.ascontiguousarray(df[names].to_numpy(dtype=np.float64).T)
    chan_units = [units[header.index(c)] for c in names] if units else None
    return _Read(data, rate_hz=rate, names=names, units=chan_units, notes=notes, line_of=line_of)


# --------------------------------------------------------------------------- NPZ
def _read_npz(path: Path, n_expected: int | None) -> _Read:
    try:
        archive = np.load(path, allow_pickle=False)
    except (OSError, ValueError, zipfile.BadZipFile, EOFError) as exc:
        raise RunFileError(f"{path}: cannot be read as a NumPy .npz archive ({exc})") from exc
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise RunFileError(f"{path}: holds a single array, not an .npz archive with keys 'data' "
                           "and 'rate_hz'")
    with archive:
        keys = list(archive.files)

        def get(key: str) -> np.ndarray:
            try:
                return archive[key]
            except ValueError as exc:
                if "pickle" not in str(exc):
                    raise RunFileError(f"{path}: key '{key}' is not a readable array ({exc}); "
                                       "the archive is damaged: write it again") from exc
                raise RunFileError(f"{path}: key '{key}' holds a pickled object array; refused, "
                                   "as loading a pickle can run code: store plain numeric "
                                   "arrays (and names as a string array)") from exc
            except (OSError, EOFError, zipfile.BadZipFile, zlib.error, NotImplementedError,
                    KeyError) as exc:  # a damaged member: bad CRC, cut-off or bad compression
                raise RunFileError(f"{path}: key '{key}' cannot be read ({exc}); the archive is "
                                   "damaged: write it again") from exc

        if "data" not in keys:
            raise RunFileError(f"{path}: missing key 'data' (found: {', '.join(keys) or 'none'});"
                               " expected 'data' (channels x samples) and 'rate_hz'")
        data = get("data")
        rate = None
        if "rate_hz" in keys:
            r = get("rate_hz")
            if r.size != 1 or r.dtype.kind not in "iuf":
                raise RunFileError(f"{path}: key 'rate_hz' must be one number, not {r.dtype} "
                                   f"of shape {r.shape}")
            rate = float(r.reshape(()))
            if not (math.isfinite(rate) and rate > 0):
                raise RunFileError(f"{path}: key {describe('rate_hz', rate, RATE_RULE)}")
        names = None
        if "channel_names" in keys:
            cn = get("channel_names")
            if cn.ndim != 1 or cn.dtype.kind not in "US":
                raise RunFileError(f"{path}: key 'channel_names' must be a 1-D string array, not "
                                   f"{cn.dtype} of shape {cn.shape}")
            names = [str(x.decode() if isinstance(x, bytes) else x) for x in cn]
        other = [k for k in keys if k not in ("data", "rate_hz", "channel_names")]
    notes: dict[str, Any] = {}
    if other:
        notes["ignored_keys"] = other
    if data.dtype.kind not in "iuf":
        raise RunFileError(f"{path}: key 'data' has dtype {data.dtype}; allowed: real numbers")
    if data.dtype.kind in "iu":
        data = data.astype(np.float64)  # stored numbers are values, not PCM codes
        notes["converted_integers_to_float64"] = True
    if data.ndim == 1:
        data = data.reshape(1, -1)
    elif data.ndim != 2:
        raise RunFileError(f"{path}: key 'data' has shape {data.shape}; allowed: (channels, "
                           "samples), (samples, channels) or (samples,)")
    else:
        k = len(names) if names is not None else n_expected
        a, b = data.shape
        if k is not None and k not in (a, b):
            raise RunFileError(f"{path}: key 'data' has shape {data.shape} but {k} channel names "
                               "are given; one axis must have one entry per channel")
        transpose = (b == k and a != k) if k is not None else a > b
        if transpose:
            data = data.T
            notes["transposed"] = f"data stored as samples x channels {(a, b)}"
    return _Read(data, rate_hz=rate, names=names, notes=notes)


# --------------------------------------------------------------------------- MAT
# scipy's compiled MAT 5 reader can crash the interpreter (a segmentation fault) on a damaged
# file instead of raising, so the file is loaded in a child process that keeps only the numeric
# arrays and hands them back as an .npz archive (read with allow_pickle=False).
_MAT_CHILD = r"""
import sys
import numpy as np
import scipy.io
src, dst = sys.argv[1], sys.argv[2]
try:
    content = scipy.io.loadmat(src)
except NotImplementedError as exc:
    sys.stderr.write(f"v7.3: {exc}")
    sys.exit(3)
except Exception as exc:
    sys.stderr.write(f"{type(exc).__name__}: {exc}")
    sys.exit(4)
arrays, other = {}, []
for key, value in content.items():
    if key.startswith("__"):
        continue
    if isinstance(value, np.ndarray) and value.dtype.kind in "iuf":
        arrays["v_" + key] = value  # prefixed: a variable may be called e.g. allow_pickle
    else:
        other.append(key)
with open(dst, "wb") as f:
    np.savez(f, other=np.array(other, dtype=str), **arrays)
"""


def _loadmat_isolated(path: Path) -> tuple[dict[str, np.ndarray], list[str]]:
    """Numeric variables of a MAT file (in file order) and the names of the other variables."""
    import subprocess
    import sys
    import tempfile

    with tempfile.TemporaryDirectory(prefix="foldline_mat_") as tmp:
        out = Path(tmp) / "vars.npz"
        proc = subprocess.run([sys.executable, "-c", _MAT_CHILD, str(path), str(out)],
                              capture_output=True, text=True, stdin=subprocess.DEVNULL)
        err = proc.stderr.strip().splitlines()[-1] if proc.stderr.strip() else ""
        if proc.returncode == 3:
            raise RunFileError(f"{path}: MATLAB v7.3 (HDF5) files are not supported; save it "
                               "with save(..., '-v7') or export the channels to .npz")
        if proc.returncode == 4:
            raise RunFileError(f"{path}: cannot be read as a MATLAB .mat file ({err})")
        if proc.returncode != 0 or not out.is_file():
            raise RunFileError(f"{path}: cannot be read as a MATLAB .mat file (the MAT reader "
                               f"stopped with status {proc.returncode}: the file is damaged); "
                               "save it again or export the channels to .npz")
        with np.load(out, allow_pickle=False) as archive:
            arrays = {k[2:]: archive[k] for k in archive.files if k.startswith("v_")}
            other = [str(k) for k in archive["other"]]
    return arrays, other


def _read_mat(path: Path) -> _Read:
    content, other = _loadmat_isolated(path)
    ignored = list(other)
    vectors: dict[str, np.ndarray] = {}
    scalars: dict[str, float] = {}
    for key, value in content.items():
        v = value.squeeze()
        if v.ndim == 0:
            scalars[key] = float(v)
        elif v.ndim == 1:
            vectors[key] = v
        else:
            ignored.append(key)
    if not vectors:
        raise RunFileError(f"{path}: holds no numeric vector to use as a channel (variables: "
                           f"{', '.join([*content, *other]) or 'none'})")
    length = max(v.size for v in vectors.values())
    names = [k for k, v in vectors.items() if v.size == length]
    ignored += [k for k, v in vectors.items() if v.size != length]
    data = np.empty((len(names), length), dtype=np.float64)
    for i, k in enumerate(names):
        data[i] = vectors[k]
    notes: dict[str, Any] = {}
    if scalars:
        notes["scalars"] = scalars
    if ignored:
        notes["ignored_variables"] = ignored
    return _Read(data, names=names, notes=notes)


# --------------------------------------------------------------------------- read_run
def _rate(path: Path, found: list[tuple[str, float]]) -> float:
    if not found:
        raise RunFileError(f"{path}: the file gives no sample rate; pass --rate (rate_hz=) or set "
                           "\"rate_hz\" in the sidecar")
    first_name, first = found[0]
    for name, value in found[1:]:
        if abs(value - first) > _RATE_RTOL * first:
            said = "; ".join(f"{n} says {v:.10g} Hz" for n, v in found)
            raise RunFileError(f"{path}: sample rates disagree ({said}); remove or correct the "
                               "wrong one")
    return first


def read_run(path: str | os.PathLike, *, rate_hz: float | None = None,
             sidecar: str | os.PathLike | Sidecar | None = None) -> Run:
    """Read a run file and its sidecar.

    Parameters
    ----------
    path : path-like
        ``.wav``, ``.csv``, ``.npz`` or ``.mat`` file.
    rate_hz : float, optional
        Sample rate in Hz for files that carry none (MAT, CSV without a time column); where the
        file or sidecar gives one too, they must agree.
    sidecar : path-like or Sidecar, optional
        Metadata; by default ``path`` with extension ``.json``, used when it exists.

    Returns
    -------
    Run
        ``source`` is ``path``; the log's first entry ("read") records the format, the sidecar
        and what the reader noticed (units row, MAT scalars such as a published rpm, ignored
        variables, a transposed array).

    Raises
    ------
    RunFileError
        Unknown extension, unreadable or invalid file or sidecar, no rate or conflicting rates,
        a channel count differing between file and sidecar, conflicting names or units, or a
        non-finite value (channel and time named).

    Notes
    -----
    WAV: int16, int32 and float files are memory-mapped (``run.data`` is a read-only
    :class:`numpy.memmap`); int24 files are converted to float32 in chunks.  NPZ: ``data`` of
    shape (channels, samples); a 2-D array is taken as (samples, channels) and transposed when
    ``channel_names`` (or the sidecar's channel list) matches its second axis only, or, with no
    names, when it has more rows than columns (recordings have more samples than channels).
    MAT: every numeric vector of the largest common length becomes a channel named after its
    variable; scalars (e.g. ``X105RPM``) are recorded in the log.  Integer NPZ and MAT arrays
    are values and are converted to float64 unscaled.  Float data are scanned once for NaN and
    inf in chunks (the file is read once; memory does not grow with it).
    """
    path = Path(path)
    ext = path.suffix.lower()
    if ext not in RUN_EXTENSIONS:
        from workbench.machine.filekind import wrong_file_hint

        hint = wrong_file_hint(path, "run") if path.is_file() else ""
        raise RunFileError(f"{path}: " + (hint or f"extension {ext or '(none)'!r} is not a run "
                                          f"file format; allowed: {', '.join(RUN_EXTENSIONS)}"))
    if path.is_dir():
        raise RunFileError(f"{path}: is a folder; give a run file ({', '.join(RUN_EXTENSIONS)})")
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

    if ext == ".wav":
        data, info = read_wav(path)
        found = _Read(data, rate_hz=info.rate_hz,
                      notes={"sample_format": info.sample_format})
    elif ext == ".csv":
        found = _read_csv(path)
    elif ext == ".npz":
        found = _read_npz(path, n_meta)
    else:
        found = _read_mat(path)
    data = found.data
    n_ch = data.shape[0]

    rates = []
    if found.rate_hz is not None:
        rates.append((f"the {ext[1:].upper()} file", found.rate_hz))
    if meta and meta.rate_hz is not None:
        rates.append((str(meta_name), meta.rate_hz))
    if rate_hz is not None:
        rates.append(("--rate (rate_hz=)", float(rate_hz)))
    rate = _rate(path, rates)

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
    else:
        names = found.names or [f"ch{i + 1}" for i in range(n_ch)]
        units = found.units or [""] * n_ch
        channels = [Channel(n, u) for n, u in zip(names, units)]
    names = [c.name for c in channels]

    tacho = None
    machine = None
    ppr, missing = 1, 0
    if meta:
        ppr, missing = meta.pulses_per_rev, meta.missing_pulses
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
    run = Run(data, rate, tuple(channels), tacho=tacho, pulses_per_rev=ppr,
              missing_pulses=missing, machine_file=machine, source=str(path))
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
    ext = path.suffix.lower()
    if ext not in _WRITE_EXTENSIONS:
        raise RunFileError(f"{path}: cannot write extension {ext or '(none)'!r}; allowed: "
                           f"{', '.join(_WRITE_EXTENSIONS)}")
    side = sidecar_path(path)
    check_writable(path, force=force)
    check_writable(side, force=force)
    meta = sidecar_for_run(run, path, notes=notes)
    with atomic_output(side, force=force) as side_tmp:
        write_sidecar(meta, side_tmp, force=True)
        if ext == ".wav":
            with WavWriter(path, run.rate_hz, run.n_channels, sample_format=sample_format,
                           force=force, channel_names=run.channel_names) as w:
                for a in range(0, run.n_samples, _CHUNK):
                    w.write(run.data[:, a:a + _CHUNK])
        else:
            data = run.data
            if data.dtype.kind == "i":
                data = data.astype(np.float64) / full_scale(data.dtype)
            with atomic_output(path, force=force) as tmp, open(tmp, "wb") as f:
                np.savez(f, data=np.asarray(data), rate_hz=np.float64(run.rate_hz),
                         channel_names=np.array(run.channel_names, dtype=str))
    return path
