"""CSV run files: a header row naming the columns, an optional units row, then one row per sample.

The delimiter is the first of ``,``, ``;`` or tab found in the header.  A column named
``time_s``, ``time`` or ``t`` (any case) gives the sample rate and must be uniformly spaced
(within 1e-6 of the step, relative: printed times are rounded); the other columns are channels,
named by the header.  A second row with no number in it is a units row.  Every value is read into
memory (text cannot be memory-mapped).
"""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from workbench.errors import RunFileError
from workbench.runs.formats.base import TIME_NAMES as _TIME_NAMES, FormatRead, ReadRequest, whole_rate

__all__ = ["read"]

_TIME_RTOL = 1e-6


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def read(path: Path, request: ReadRequest) -> FormatRead:
    """Read a CSV run file (see the module notes); ``request`` is not used."""
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
        rate = whole_rate(1.0 / dt)  # float noise of 1 / step is not a different rate
        notes["time_column"] = tname
        if t[0] != 0:
            notes["time_start_s"] = float(t[0])
    names = [c for c in header if c not in time_cols]
    if not names:
        raise RunFileError(f"{path}: has only a time column; add at least one data column")
    data = np.ascontiguousarray(df[names].to_numpy(dtype=np.float64).T)
    chan_units = [units[header.index(c)] for c in names] if units else None
    return FormatRead(data, rate_hz=rate, names=names, units=chan_units, notes=notes, line_of=line_of)

