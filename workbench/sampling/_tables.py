"""Private reader of small numeric CSV tables (speed tables, filter tables)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.checks import describe
from workbench.errors import InputError, where


def read_numeric_csv(path, layouts: tuple[tuple[str, ...], ...], what: str
                     ) -> tuple[tuple[str, ...], dict[str, np.ndarray]]:
    """Read a CSV file whose header is exactly one of `layouts`; every cell a finite number.

    Parameters
    ----------
    path : str or path-like
        The file.
    layouts : tuple of tuple of str
        Allowed sets of column names, e.g. ``(("hz", "db"), ("fraction", "db"))``; the file's
        columns must match one of them (in any order).
    what : str
        Name of the table for messages, e.g. ``"speed table"``.

    Returns
    -------
    layout : tuple of str
        The matching layout.
    columns : dict of str to ndarray
        Each column as a float array; at least two rows.

    Raises
    ------
    InputError
        Naming the file, and the line and column of a bad cell.  Line numbers count the header
        as line 1; trailing empty lines are ignored, other empty cells are errors.
    """
    name = str(path)
    expected = " or ".join(",".join(layout) for layout in layouts)
    try:
        table = pd.read_csv(path, dtype=str, skip_blank_lines=False, keep_default_na=False)
    except FileNotFoundError:
        raise InputError(f"{name}: {what} not found") from None
    except OSError as exc:
        raise InputError(f"{name}: cannot read the {what}: {exc.strerror or exc}") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        text = str(exc).strip()
        first = text.splitlines()[0] if text else type(exc).__name__
        raise InputError(f"{name}: not a readable CSV {what} ({first}); expected a header line "
                         f"{expected} and one row per point") from None
    header = tuple(str(c).strip() for c in table.columns)
    table.columns = list(header)
    layout = next((lay for lay in layouts if sorted(lay) == sorted(header)), None)
    if layout is None:
        known = {c for lay in layouts for c in lay}
        unknown = [c for c in header if c not in known]
        detail = f"unknown column {unknown[0]!r}" if unknown else f"columns {','.join(header)}"
        raise InputError(f"{where(name, 'header')}: {detail}; a {what} has the columns "
                         f"{expected}")
    filled = (table != "").any(axis=1).to_numpy()
    keep = int(np.nonzero(filled)[0][-1]) + 1 if filled.any() else 0
    table = table.iloc[:keep]
    if len(table) < 2:
        raise InputError(f"{name}: a {what} needs at least two rows, got {len(table)}")
    columns = {}
    for column in layout:
        text = table[column].str.strip()
        numbers = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(numbers)
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(f"{where(name, f'line {i + 2}')}: "
                             + describe(column, text.iloc[i], "must be a finite number"))
        columns[column] = numbers
    return layout, columns
