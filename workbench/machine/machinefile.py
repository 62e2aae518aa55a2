"""Machine file: read, validate and write the TOML description of a drive train.

Layout (every key, type, default and rule: docs/machine-file.md)::

    [machine]                 name, reference
    [[shaft]]                 name
    [[gear_stage]]            name, driver, driven, driver_teeth, driven_teeth,
                              harmonics = 3, sidebands = 0
    [[planetary_stage]]       name, sun_teeth, planet_teeth, ring_teeth, planets,
                              sun, carrier, ring (shaft names or "fixed"; exactly one "fixed"),
                              harmonics = 3
    [[bearing]]               name, shaft, rolling_elements, element_diameter, pitch_diameter,
                              contact_angle_deg = 0, rotating_race = "inner", harmonics = 1
    [[rotor]]                 name, shaft, count, harmonics = 1
    [[order]]                 name, shaft, order, harmonics = 1
    [[line]]                  name, hz, harmonics = 1
    [[resonance]]             name, hz, damping_ratio (optional): structural natural frequency
    [[critical]]              name, rpm, damping_ratio (optional): rotor critical speed

Every source also takes ``level_db`` (default 0).  Unknown tables and keys are errors (they are
usually typos); every message names the file, the entry, the key, the bad value and what is
allowed, e.g. ``"gearbox.toml: [[bearing]] 'output NDE': contact_angle_deg = 95: must be >= 0
and < 90"``.

TOML keeps the order of entries within one table kind, not across kinds, so sources read from a
file come grouped by table, in the order each table first appears.  :func:`write_machine` writes
sources grouped the same way; reading back what it wrote gives an equal :class:`Machine` for any
machine whose sources are grouped by kind (every machine read from a file is).
"""

from __future__ import annotations

import contextlib
import os
import tomllib
import warnings
from collections.abc import Mapping
from dataclasses import MISSING, fields

from workbench.machine.filekind import wrong_file_hint
from workbench.checks import close_names
from workbench.errors import FoldlineWarning, InputError, MachineFileError, where
from workbench.fileio import write_text
from workbench.machine.entries import MODE_TYPES, SOURCE_TYPES, Shaft
from workbench.machine.machine import Machine

__all__ = [
    "machine_from_dict",
    "machine_to_dict",
    "machine_to_toml",
    "read_machine",
    "write_machine",
]

_ENTRY_TYPES = {cls.table: cls for cls in (Shaft, *SOURCE_TYPES, *MODE_TYPES)}
_MODE_TABLES = tuple(cls.table for cls in MODE_TYPES)
_MACHINE_KEYS = ("name", "reference")
_TABLES = ("machine", *_ENTRY_TYPES)


def _table_label(table: str) -> str:
    return "[machine]" if table == "machine" else f"[[{table}]]"


def _keys(cls) -> tuple[list[str], list[str]]:
    """(all keys, required keys) of an entry class, in field order."""
    all_keys = [f.name for f in fields(cls)]
    required = [
        f.name for f in fields(cls) if f.default is MISSING and f.default_factory is MISSING
    ]
    return all_keys, required


@contextlib.contextmanager
def _located(source: str):
    """Prefix errors and foldline warnings raised inside with the file name."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            yield
        except MachineFileError as exc:
            raise type(exc)(where(source, str(exc))) from None
    for w in caught:
        if issubclass(w.category, FoldlineWarning):
            warnings.warn(where(source, str(w.message)), w.category, stacklevel=4)
        else:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)


def _check_keys(source: str, label: str, entry: Mapping, allowed, required) -> None:
    for key in entry:
        if key not in allowed:
            close = close_names(key, allowed)
            hint = f"did you mean '{close[0]}'? " if close else ""
            raise MachineFileError(
                f"{where(source, label)}: unknown key '{key}'; {hint}"
                f"allowed keys are {', '.join(allowed)}"
            )
    for key in required:
        if key not in entry:
            raise MachineFileError(f"{where(source, label)}: missing required key '{key}'")


def _entry_label(table: str, entry: Mapping, index: int) -> str:
    name = entry.get("name")
    if isinstance(name, str) and name:
        return f"[[{table}]] '{name}'"
    return f"[[{table}]] #{index}"


def machine_from_dict(d: Mapping, source: str = "<dict>") -> Machine:
    """Build and validate a :class:`Machine` from the parsed contents of a machine file.

    Parameters
    ----------
    d : mapping
        Tables as :func:`tomllib.loads` gives them: ``{"machine": {...}, "shaft": [{...}],
        "gear_stage": [{...}], ...}``.
    source : str, optional
        File name (or other label) shown in front of every error message.

    Returns
    -------
    Machine
        With its train checked: :meth:`Machine.shaft_orders` and :meth:`Machine.lines` have
        run once without error.

    Raises
    ------
    MachineFileError
        On the first problem found, naming the source, the entry, the key, the bad value and
        what is allowed.
    TrainError
        If the shafts do not connect to the reference shaft, or connect inconsistently.

    Warns
    -----
    FoldlineWarning
        For a planetary stage whose ring_teeth is not sun_teeth + 2 * planet_teeth (kept).
    """
    if not isinstance(d, Mapping):
        raise MachineFileError(
            f"{source}: a machine must be a table (dict), got {type(d).__name__}"
        )
    for table in d:
        if table not in _TABLES:
            close = close_names(table, _TABLES)
            hint = f"did you mean {_table_label(close[0])}? " if close else ""
            raise MachineFileError(
                f"{source}: unknown table [{table}]; {hint}allowed tables are "
                + ", ".join(_table_label(t) for t in _TABLES)
            )
    head = d.get("machine")
    if head is None:
        raise MachineFileError(f"{source}: missing [machine] table (with name and reference)")
    if not isinstance(head, Mapping):
        raise MachineFileError(
            f"{source}: [machine] must be a single table (write [machine], not [[machine]] "
            "or machine = ...)"
        )
    _check_keys(source, "[machine]", head, _MACHINE_KEYS, _MACHINE_KEYS)
    built: dict[str, list] = {}
    with _located(source):
        for table, cls in _ENTRY_TYPES.items():
            entries = d.get(table, [])
            if not isinstance(entries, (list, tuple)) or not all(
                isinstance(e, Mapping) for e in entries
            ):
                raise MachineFileError(
                    f"[[{table}]] must be an array of tables (write [[{table}]] above each "
                    "entry)"
                )
            allowed, required = _keys(cls)
            built[table] = []
            for index, entry in enumerate(entries, start=1):
                label = _entry_label(table, entry, index)
                _check_keys(None, label, entry, allowed, required)
                built[table].append(cls(**entry))
        if not built["shaft"]:
            raise MachineFileError("no [[shaft]]; give at least one shaft (the reference shaft)")
        order = [t for t in d if t in _ENTRY_TYPES and t != "shaft" and t not in _MODE_TABLES]
        sources = tuple(src for t in order for src in built[t])
        machine = Machine(head["name"], head["reference"], tuple(built["shaft"]), sources,
                          resonances=tuple(built["resonance"]),
                          criticals=tuple(built["critical"]))
        machine.lines()  # runs shaft_orders(): train and line-name errors show at load time
    return machine


def read_machine(path) -> Machine:
    """Read and validate a machine file.

    Parameters
    ----------
    path : str or path-like
        The TOML file.

    Returns
    -------
    Machine

    Raises
    ------
    MachineFileError
        If the file is missing or unreadable, is not valid TOML (the message gives the line
        and column tomllib reports), or does not describe a valid machine; see
        :func:`machine_from_dict`.
    TrainError
        If the shafts do not connect to the reference shaft, or connect inconsistently.
    """
    source = os.fspath(path)
    try:
        with open(source, "rb") as fh:
            d = tomllib.load(fh)
    except FileNotFoundError:
        raise MachineFileError(f"{source}: machine file not found") from None
    except IsADirectoryError:
        raise MachineFileError(f"{source}: is a directory, not a machine file") from None
    except OSError as exc:
        raise MachineFileError(f"{source}: cannot read machine file: {exc.strerror}") from None
    except tomllib.TOMLDecodeError as exc:
        hint = wrong_file_hint(source, "machine")
        raise MachineFileError(f"{source}: {hint}" if hint else f"{source}: not valid TOML: {exc}") from None
    except UnicodeDecodeError as exc:
        hint = wrong_file_hint(source, "machine")
        raise MachineFileError(f"{source}: {hint}" if hint else (
            f"{source}: not UTF-8 text (byte {exc.start}); save the machine file as UTF-8")
        ) from None
    if isinstance(d, Mapping):
        hint = wrong_file_hint(source, "machine", tables=d.keys())
        if hint:
            raise MachineFileError(f"{source}: {hint}")
    return machine_from_dict(d, source=source)


def machine_to_dict(m: Machine) -> dict:
    """The machine as machine-file tables (every field written, defaults included).

    Parameters
    ----------
    m : Machine

    Returns
    -------
    dict
        ``{"machine": {"name", "reference"}, "shaft": [...], <table>: [...], ...}`` with source
        tables in the order each kind first appears in ``m.sources``; tables without entries
        are left out; then ``"resonance"`` and ``"critical"`` (a damping ratio that is None,
        i.e. not given, is left out).  :func:`machine_from_dict` turns it back into an equal
        machine when the sources are grouped by kind.
    """
    out: dict = {
        "machine": {"name": m.name, "reference": m.reference},
        "shaft": [{"name": s.name} for s in m.shafts],
    }
    for src in m.sources:
        out.setdefault(src.table, []).append({f.name: getattr(src, f.name) for f in fields(src)})
    for mode in m.resonances + m.criticals:
        out.setdefault(mode.table, []).append(
            {f.name: getattr(mode, f.name) for f in fields(mode) if getattr(mode, f.name) is not None}
        )
    return out


def _toml_string(text: str) -> str:
    escapes = {'"': '\\"', "\\": "\\\\", "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f",
               "\r": "\\r"}
    parts = []
    for ch in text:
        if ch in escapes:
            parts.append(escapes[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            parts.append(f"\\u{ord(ch):04X}")
        else:
            parts.append(ch)
    return '"' + "".join(parts) + '"'


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value)  # shortest repr reads back to the same float; always has . or e
    raise MachineFileError(f"cannot write {value!r} ({type(value).__name__}) to a machine file")


def machine_to_toml(m: Machine) -> str:
    """The machine file text of `m` (see :func:`machine_to_dict` for what is written)."""
    lines = ["# foldline machine file", ""]
    for table, body in machine_to_dict(m).items():
        for entry in [body] if isinstance(body, Mapping) else body:
            lines.append(_table_label(table))
            lines.extend(f"{key} = {_toml_value(value)}" for key, value in entry.items())
            lines.append("")
    return "\n".join(lines)


def write_machine(m: Machine, path) -> None:
    """Write `m` as a machine file (UTF-8 TOML), replacing `path` only once fully written.

    Parameters
    ----------
    m : Machine
    path : str or path-like
        Destination; an existing file is replaced.

    Notes
    -----
    ``read_machine(path) == m`` afterwards when the sources of `m` are grouped by kind.
    """
    path = os.fspath(path)
    text = machine_to_toml(m)
    try:
        write_text(path, text, force=True)
    except InputError as exc:   # the folder does not exist, or the path is a folder
        raise MachineFileError(f"{path}: cannot write machine file: {exc}") from exc
    except OSError as exc:
        raise MachineFileError(f"{path}: cannot write machine file: {exc.strerror}") from exc
