"""What the verbs of the ``foldline`` command share at their ends: checking an output folder
before the work, writing tables, printing tables and the one JSON object of ``--json``.

Only the standard library at import time: ``foldline --help`` loads this module and must stay
free of numpy and pandas.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

from workbench.errors import InputError, OutputExistsError

__all__ = ["jsonable", "emit_json", "thin", "MAX_JSON_POINTS", "finish", "rate_option", "check_out_folder",
           "channel_folders", "write_csv", "print_frame", "print_table"]


def jsonable(obj):
    """``obj`` with numpy scalars and arrays, tuples and paths made JSON types; NaN and inf
    become None (JSON has no such numbers)."""
    import numpy as np   # here, not at the top: ``foldline --help`` should not load it

    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def emit_json(obj) -> None:
    """Print one JSON object on stdout."""
    sys.stdout.write(json.dumps(jsonable(obj), allow_nan=False) + "\n")


#: Most points of a time series in the JSON output (the files written hold every point).
MAX_JSON_POINTS = 5000


def thin(n: int, most: int = MAX_JSON_POINTS):
    """Indices of at most ``most`` evenly spread points of ``n``, first and last included."""
    import numpy as np

    if n <= most:
        return np.arange(n)
    return np.unique(np.rint(np.linspace(0, n - 1, most)).astype(np.int64))


def finish(args, result: dict, show, files=()) -> int:
    """The end of a verb: list the written ``files`` under ``"files"`` (when there are any),
    then print ``result`` as one JSON object with ``--json`` or call ``show()`` for the text.

    Returns
    -------
    int
        The exit status, 0.
    """
    if files:
        result["files"] = [str(f) for f in files]
    if args.json:
        emit_json(result)
    else:
        show()
    return 0


def rate_option(value, name: str = "--rate") -> float:
    """A sample rate given on the command line (``--rate``), as float.

    The rule is the one of every sample rate (:func:`workbench.checks.rate_hz`); the message
    names the option as the command's messages do: ``--rate -1: must be a positive, ...``.
    """
    from workbench.checks import RATE_RULE, FieldError, rate_hz

    try:
        return rate_hz(None, "rate_hz", value)
    except FieldError:
        raise InputError(f"{name} {value:g}: {RATE_RULE}") from None


def check_out_folder(out: Path, names=(), *, force: bool, hint: str = "") -> None:
    """Refuse, before any work, an output folder that is a file or that holds one of the
    verb's output ``names`` already (unless ``force``).

    Parameters
    ----------
    out : Path
        The folder the verb writes into (it need not exist).
    names : iterable of str
        File names the verb writes into ``out``.
    force : bool
        Existing outputs may be replaced.
    hint : str
        Added to the message when ``out`` is not a folder (``"; give a folder"``).

    Raises
    ------
    InputError
        ``out`` exists and is not a folder.
    OutputExistsError
        An output exists and ``force`` is not set.
    """
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder{hint}")
    if not force:
        clash = [name for name in names if (out / name).exists()]
        if clash:
            raise OutputExistsError(f"{out / clash[0]}: exists already; pass --force to replace "
                                    f"the outputs in {out}")


def channel_folders(out: Path, names) -> dict:
    """Output folder of each channel: ``out`` itself for one channel; for several, one
    sub-folder per channel named after it (characters other than letters, digits, ``.``,
    ``-`` and ``_`` become ``_``; ``ch<N>_`` is put in front where two names would clash)."""
    import re

    names = list(names)
    if len(names) == 1:
        return {names[0]: out}
    safe = [re.sub(r"[^A-Za-z0-9._-]", "_", n).strip(".") or "channel" for n in names]
    taken = [s.lower() for s in safe]
    folders = {}
    for i, (n, f) in enumerate(zip(names, safe)):
        if taken.count(f.lower()) > 1:
            f = f"ch{i + 1}_{f}"
        folders[n] = out / f
    return folders


def write_csv(table, path, *, force: bool = False) -> Path:
    """Write a pandas table as CSV (no index) under a temporary name, then rename it."""
    from workbench.fileio import atomic_output

    with atomic_output(path, force=force) as tmp:
        table.to_csv(tmp, index=False)
    return Path(path)


def print_frame(table, *, digits: str = ".4g", **kwargs) -> None:
    """Print a pandas table without its index, floats with the format ``digits``."""
    print(table.to_string(index=False, float_format=lambda v: format(v, digits), **kwargs))


def print_table(title: str, table, columns=None, *, digits: str = ".1f") -> None:
    """Print ``title: <rows>`` and then the table (``columns`` of it), when it has rows."""
    print(f"\n{title}: {len(table)}")
    if len(table):
        print_frame(table if columns is None else table[list(columns)], digits=digits)
