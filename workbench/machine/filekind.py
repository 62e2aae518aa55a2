"""Recognise which of foldline's inputs a file is, so that a file given in the wrong place gets
a message that says so ("this is a plan file, not a machine file") instead of a parser's
complaint about its bytes.

Used by the machine, plan and run readers.  Only the first few kilobytes are read: the magic
bytes of the binary run formats (WAV ``RIFF....WAVE``, MAT ``MATLAB 5.0``, NPZ ``PK``, HDF5,
MDF), the extension, and for TOML the top-level tables (``[machine]``/``[[shaft]]`` for a machine
file, ``[speed]``/``[acquisition]`` for a plan file).
"""

from __future__ import annotations

import os
import tomllib
from pathlib import Path

__all__ = ["guess_file_kind", "wrong_file_hint", "MACHINE_TABLES", "PLAN_TABLES"]

#: Top-level tables that only a machine file has.
MACHINE_TABLES = frozenset({"machine", "shaft", "gear_stage", "planetary_stage", "bearing", "rotor",
                            "order", "line", "resonance", "critical"})
#: Top-level tables that only a plan file has.
PLAN_TABLES = frozenset({"speed", "acquisition", "band", "resampling", "limit"})

_HEAD = 4096


def _toml_kind(tables) -> str | None:
    tables = set(tables)
    if tables & {"speed", "acquisition"} and not tables & {"machine", "shaft"}:
        return "plan"
    if tables & {"machine", "shaft"} and not tables & {"speed", "acquisition"}:
        return "machine"
    return None


def guess_file_kind(path) -> str | None:
    """What a file looks like: ``"run"``, ``"sidecar"``, ``"machine"``, ``"plan"`` or None.

    Parameters
    ----------
    path : path-like

    Returns
    -------
    str or None
        None when the file cannot be read or looks like none of them.
    """
    p = Path(os.fspath(path))
    try:
        with open(p, "rb") as fh:
            head = fh.read(_HEAD)
    except OSError:
        return None
    ext = p.suffix.lower()
    if head[:4] == b"RIFF" and head[8:12] == b"WAVE":
        return "run"
    if head.startswith(b"MATLAB 5.0") or head.startswith(b"\x89HDF") or head.startswith(b"MDF "):
        return "run"
    if head.startswith(b"PK\x03\x04") and ext == ".npz":
        return "run"
    if ext in (".wav", ".mat", ".npz", ".mf4", ".mdf", ".h5", ".hdf5", ".csv"):
        return "run"
    if ext == ".json" or head.lstrip()[:1] == b"{":
        return "sidecar"
    if ext == ".toml" or head:
        try:
            with open(p, "rb") as fh:
                d = tomllib.load(fh)
        except (OSError, tomllib.TOMLDecodeError, UnicodeDecodeError):
            return None
        return _toml_kind(d)
    return None


_WHAT = {
    "run": "a run file (recorded or simulated samples)",
    "sidecar": "a run's JSON sidecar",
    "machine": "a machine file (it has [machine] and the drive train)",
    "plan": "a plan file (it has [speed] and [acquisition])",
}
_EXPECT = {"machine": "the machine file (TOML with [machine], [[shaft]], ...)",
           "plan": "the plan file (TOML with [speed] and [acquisition])",
           "run": "the run file (WAV, CSV, NPZ, MAT, MF4 or HDF5)"}


def wrong_file_hint(path, expected: str, *, tables=None) -> str:
    """A sentence for an error message when ``path`` is not the kind of file ``expected``.

    Parameters
    ----------
    path : path-like
    expected : str
        ``"machine"``, ``"plan"`` or ``"run"``.
    tables : iterable of str, optional
        Top-level TOML tables already parsed (saves reading the file again).

    Returns
    -------
    str
        ``""`` when the file does not look like another of foldline's inputs, else e.g.
        ``"this looks like a plan file (...), not the machine file: the machine file comes
        first, then the plan"``.
    """
    kind = _toml_kind(tables) if tables is not None else guess_file_kind(path)
    if kind is None or kind == expected:
        return ""
    text = f"this looks like {_WHAT[kind]}, not {_EXPECT[expected]}"
    if {kind, expected} == {"machine", "plan"}:
        text += "; the machine file comes first, then the plan (e.g. foldline plan MACHINE PLAN)"
    elif expected == "run":
        text += "; give the recorded run here"
    elif kind in ("run", "sidecar"):
        text += "; check the order of the arguments"
    return text
