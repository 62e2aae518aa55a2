"""The JSON sidecar: metadata of a run file, stored beside it under the same stem.

``RUN.json`` beside ``RUN.wav`` (or ``.csv``, ``.npz``, ``.mat``, ``.mf4``, ``.h5``)::

    {
      "rate_hz": 12800,
      "channels": [{"name": "vibration", "unit": "m/s^2", "sensitivity": 1.0},
                   {"name": "tacho", "unit": "V", "sensitivity": 1.0}],
      "tacho_channel": "tacho",
      "pulses_per_rev": 60,
      "missing_pulses": 2,
      "machine_file": "gearbox.toml",
      "notes": "free-form: any JSON value",
      "unit_under_test": "gearbox GB-7", "serial_number": "GB7-0042", "test_id": "FAT-12",
      "operator": "A. Test", "date": "2026-11-30"
    }

Test metadata (:mod:`workbench.runs.metadata`): ``unit_under_test``, ``serial_number``,
``test_id``, ``operator``, ``date`` (ISO 8601) at the top level, and per channel the sensor's
``position``, ``direction`` and ``sensor_type``; all optional text.

Every key is optional.  ``tacho_channel`` is a channel name or a 1-based index.
``sensitivity`` is in raw units per physical unit (see :mod:`workbench.runs.run`).
``machine_file`` is relative to the sidecar's folder and must stay inside it: no absolute
path, no ``..``, no symbolic link leading out.  Unknown keys are errors (they are usually typos),
and the message suggests the closest known key.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path, PurePosixPath, PureWindowsPath
from typing import Any

from workbench.checks import FieldError, close_names, describe, positive, positive_int, rate_hz, show
from workbench.errors import InputError, RunFileError, where
from workbench.runs.metadata import META_KEYS, SENSOR_KEYS, SensorInfo, TestMetadata
from workbench.fileio import atomic_output
from workbench.runs.run import Channel

__all__ = ["Sidecar", "read_sidecar", "write_sidecar", "sidecar_path", "resolve_inside",
           "run_metadata"]

_KEYS = ("rate_hz", "channels", "tacho_channel", "pulses_per_rev", "missing_pulses",
         "machine_file", "notes") + META_KEYS
_CHANNEL_KEYS = ("name", "unit", "sensitivity") + SENSOR_KEYS


def sidecar_path(run_path: str | os.PathLike) -> Path:
    """The sidecar of a run file: same folder, same stem, extension ``.json``."""
    return Path(run_path).with_suffix(".json")


def _unknown(key: str, allowed: tuple[str, ...], loc: str) -> RunFileError:
    close = close_names(key, allowed)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    return RunFileError(f"{loc}: unknown key '{key}'{hint}; allowed: {', '.join(allowed)}")


def resolve_inside(folder: str | os.PathLike, rel: str, loc: str) -> Path:
    """Resolve a relative path given in a sidecar and check it stays inside ``folder``.

    Parameters
    ----------
    folder : path-like
        The sidecar's folder.
    rel : str
        The path as written in the sidecar.
    loc : str
        Location for error messages (file and field).

    Returns
    -------
    Path
        The resolved absolute path (symbolic links followed).

    Raises
    ------
    RunFileError
        Not a string, empty, absolute (POSIX or Windows form), containing ``..``, or resolving
        (through a symbolic link) outside ``folder``.
    """
    if not isinstance(rel, str) or not rel.strip():
        raise RunFileError(f"{loc} = {show(rel)}: must be a file name relative to the "
                           "sidecar's folder")
    pure = PurePosixPath(rel.replace("\\", "/"))
    if pure.is_absolute() or PureWindowsPath(rel).is_absolute() or PureWindowsPath(rel).drive \
            or rel.startswith("~"):
        raise RunFileError(f"{loc} = {show(rel)}: is an absolute path; allowed: a file in the "
                           "sidecar's own folder, given relative to it")
    if ".." in pure.parts:
        raise RunFileError(f"{loc} = {show(rel)}: leads out of the sidecar's folder ('..'); "
                           "allowed: a file in the sidecar's own folder")
    base = Path(folder).resolve()
    target = (base / Path(*pure.parts)).resolve()
    if not target.is_relative_to(base):
        raise RunFileError(f"{loc} = {show(rel)}: resolves to {target} through a symbolic link, "
                           f"outside the sidecar's folder {base}; copy the file into the folder")
    return target


def _bad(loc: str, field: str, value: Any, rule: str, cls=RunFileError) -> Exception:
    """``loc: field = value: rule`` as a RunFileError (or `cls`)."""
    return cls(f"{loc}: {describe(field, value, rule)}")


def _check_int(value: Any, lo: int, hi: int | None, loc: str, field: str, what: str) -> int:
    try:
        return positive_int(None, field, value, low=lo, high=hi, whole_float=False, what=what)
    except FieldError as exc:
        raise RunFileError(f"{loc}: {exc}") from None


@dataclass(frozen=True)
class Sidecar:
    """Metadata of a run file.

    Parameters
    ----------
    channels : tuple of Channel
        One per channel of the run file, in file order; empty when the sidecar gives none.
    rate_hz : float, optional
        Sample rate in Hz, for files that do not carry one (CSV without a time column, MAT).
    tacho_channel : str or int, optional
        Tacho channel: a name or a 1-based index.
    pulses_per_rev : int
        Tooth positions per revolution, missing ones included (60-2 wheel: 60).
    missing_pulses : int
        Consecutive missing tooth positions (60-2 wheel: 2).
    machine_file : str, optional
        Machine file, relative to the sidecar's folder.
    notes : any JSON value, optional
        Free-form notes (the simulator records its settings here).
    source : str, optional
        The sidecar file, when read from one.
    metadata : TestMetadata
        Unit under test, serial number, test id, operator, date, and each channel's sensor
        position, direction and type (all optional).
    """

    channels: tuple[Channel, ...] = ()
    rate_hz: float | None = None
    tacho_channel: str | int | None = None
    pulses_per_rev: int = 1
    missing_pulses: int = 0
    machine_file: str | None = None
    notes: Any = None
    source: str | None = None
    metadata: TestMetadata = TestMetadata()

    def __post_init__(self) -> None:
        loc = self.source or "<sidecar>"
        object.__setattr__(self, "channels", tuple(self.channels))
        if self.rate_hz is not None:
            try:
                object.__setattr__(self, "rate_hz", rate_hz(None, "rate_hz", self.rate_hz))
            except FieldError as exc:
                raise RunFileError(f"{loc}: {exc}") from None
        ppr = _check_int(self.pulses_per_rev, 1, None, loc, "pulses_per_rev",
                         "tooth positions per revolution, missing ones included")
        _check_int(self.missing_pulses, 0, ppr - 1, loc, "missing_pulses",
                   "consecutive missing tooth positions, fewer than pulses_per_rev")
        names = [c.name for c in self.channels]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise RunFileError(f"{where(loc, None, 'channels')}: names must be unique; repeated: "
                               f"{', '.join(dup)}")
        t = self.tacho_channel
        if isinstance(t, str) and t.strip() and not t.strip().isdigit():
            if names and t not in names:
                raise _bad(loc, "tacho_channel", t, f"is not one of the channels "
                                                    f"({', '.join(names)})")
        elif t is not None:
            index = int(t) if isinstance(t, str) and t.strip().isdigit() else t
            _check_int(index, 1, len(names) or None, loc, "tacho_channel", "a channel name, or "
                       "a 1-based channel index")
        if self.machine_file is not None and not isinstance(self.machine_file, str):
            raise _bad(loc, "machine_file", self.machine_file, "must be a file name relative "
                                                               "to the sidecar's folder")

    @property
    def machine_path(self) -> Path | None:
        """The machine file resolved against the sidecar's folder (checked to stay inside it)."""
        if self.machine_file is None:
            return None
        folder = Path(self.source).parent if self.source else Path(".")
        return resolve_inside(folder, self.machine_file,
                              where(self.source or "<sidecar>", None, "machine_file"))

    def to_dict(self) -> dict[str, Any]:
        """The JSON object written by :func:`write_sidecar` (keys in a fixed order, no Nones)."""
        d: dict[str, Any] = {}
        if self.rate_hz is not None:
            d["rate_hz"] = int(self.rate_hz) if self.rate_hz == int(self.rate_hz) else self.rate_hz
        if self.channels:
            d["channels"] = [{"name": c.name, "unit": c.unit, "sensitivity": c.sensitivity}
                             for c in self.channels]
        if self.tacho_channel is not None:
            d["tacho_channel"] = self.tacho_channel
        d["pulses_per_rev"] = self.pulses_per_rev
        d["missing_pulses"] = self.missing_pulses
        if self.machine_file is not None:
            d["machine_file"] = self.machine_file
        if self.notes is not None:
            d["notes"] = self.notes
        meta = self.metadata
        for key in META_KEYS:
            if getattr(meta, key):
                d[key] = getattr(meta, key)
        for entry in d.get("channels", ()):
            sensor = meta.sensor(entry["name"])
            for key in SENSOR_KEYS:
                if getattr(sensor, key):
                    entry[key] = getattr(sensor, key)
        return d


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    seen: dict[str, Any] = {}
    for k, v in pairs:
        if k in seen:
            raise ValueError(f"key '{k}' appears twice")
        seen[k] = v
    return seen


def _channel(entry: Any, i: int, loc: str) -> Channel:
    cloc = where(loc, f"channels[{i + 1}]")
    if not isinstance(entry, dict):
        raise RunFileError(f"{cloc} = {show(entry)}: must be an object with name, unit, "
                           "sensitivity")
    for key in entry:
        if key not in _CHANNEL_KEYS:
            raise _unknown(key, _CHANNEL_KEYS, cloc)
    if "name" not in entry:
        raise RunFileError(f"{cloc}: 'name' is missing; every channel needs a name")
    name, unit, sens = entry["name"], entry.get("unit", ""), entry.get("sensitivity", 1.0)
    if not isinstance(name, str) or not name.strip():
        raise _bad(cloc, "name", name, "must be a non-empty string")
    if not isinstance(unit, str):
        raise _bad(cloc, "unit", unit, "must be a string such as \"m/s^2\", \"g\" or \"V\"")
    try:
        sens = positive(None, "sensitivity", sens, unit="raw units per physical unit")
    except FieldError as exc:
        raise RunFileError(f"{cloc}: {exc}") from None
    return Channel(name, unit, sens)


def _metadata(d: dict, chans: list, loc: str) -> TestMetadata:
    """The test metadata of a sidecar object (top-level keys and channel sensor keys)."""
    try:
        sensors = []
        for i, entry in enumerate(chans):
            cloc = where(loc, f"channels[{i + 1}]")
            for key in SENSOR_KEYS:
                if key in entry and not isinstance(entry[key], str):
                    raise _bad(cloc, key, entry[key], "must be a text in quotes", InputError)
            sensors.append(SensorInfo(entry["name"], **{k: entry[k] for k in SENSOR_KEYS
                                                        if k in entry}))
        for key in META_KEYS:
            if key in d and not isinstance(d[key], str):
                raise _bad(loc, key, d[key], "must be "
                           + ("an ISO 8601 date in quotes, e.g. \"2026-11-30\""
                              if key == "date" else "a text in quotes"), InputError)
        if "date" in d:
            from workbench.runs.metadata import check_date

            check_date(d["date"], where(loc, None, "date"))
        return TestMetadata(**{k: d[k] for k in META_KEYS if k in d}, sensors=tuple(sensors))
    except InputError as exc:
        raise RunFileError(str(exc)) from None


def sidecar_from_dict(d: Any, source: str = "<dict>") -> Sidecar:
    """Validate a sidecar object (as parsed from JSON).

    Parameters
    ----------
    d : dict
        The JSON object.
    source : str, optional
        File name for messages, and the folder that ``machine_file`` must stay inside.

    Returns
    -------
    Sidecar

    Raises
    ------
    RunFileError
        Unknown key (closest match suggested), wrong type or value, or a path escaping the folder.
    """
    if not isinstance(d, dict):
        raise RunFileError(f"{source}: the sidecar must hold a JSON object, not "
                           f"{type(d).__name__}")
    for key in d:
        if key not in _KEYS:
            raise _unknown(key, _KEYS, source)
    chans = d.get("channels", [])
    if not isinstance(chans, list):
        raise _bad(source, "channels", chans, "must be a list of {\"name\", \"unit\", "
                                              "\"sensitivity\"} objects")
    channels = tuple(_channel(c, i, source) for i, c in enumerate(chans))
    metadata = _metadata(d, chans, source)
    machine = d.get("machine_file")
    if machine is not None and source != "<dict>":
        resolve_inside(Path(source).parent, machine, where(source, None, "machine_file"))
    try:
        return Sidecar(channels=channels, rate_hz=d.get("rate_hz"),
                       tacho_channel=d.get("tacho_channel"),
                       pulses_per_rev=d.get("pulses_per_rev", 1),
                       missing_pulses=d.get("missing_pulses", 0), machine_file=machine,
                       notes=d.get("notes"), source=None if source == "<dict>" else source,
                       metadata=metadata)
    except InputError as exc:  # from Channel; re-raised as a file error
        raise RunFileError(f"{source}: {exc}") from exc


def read_sidecar(path: str | os.PathLike) -> Sidecar:
    """Read and validate a JSON sidecar.

    Parameters
    ----------
    path : path-like
        The ``.json`` file.

    Returns
    -------
    Sidecar

    Raises
    ------
    RunFileError
        Unreadable file, invalid JSON (line and column named), duplicate or unknown key, a bad
        value, or a ``machine_file`` leading outside the sidecar's folder.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise RunFileError(f"{path}: cannot be read as a UTF-8 JSON sidecar ({exc})") from exc
    try:
        d = json.loads(text, object_pairs_hook=_no_duplicates)
    except json.JSONDecodeError as exc:
        raise RunFileError(f"{path}: line {exc.lineno}, column {exc.colno}: not valid JSON "
                           f"({exc.msg})") from exc
    except ValueError as exc:
        raise RunFileError(f"{path}: {exc}; give each key once") from exc
    return sidecar_from_dict(d, str(path))


def write_sidecar(sidecar: Sidecar, path: str | os.PathLike, *, force: bool = False) -> Path:
    """Write a sidecar as JSON (2-space indent, fixed key order, UTF-8), atomically.

    Parameters
    ----------
    sidecar : Sidecar
        What to write.
    path : path-like
        The ``.json`` file.
    force : bool, optional
        Overwrite an existing file.

    Returns
    -------
    Path

    Raises
    ------
    OutputExistsError
        ``path`` exists and ``force`` is false.
    RunFileError
        ``machine_file`` does not stay inside the destination folder, or ``notes`` is not JSON.
    """
    path = Path(path)
    if sidecar.machine_file is not None:
        resolve_inside(path.parent if str(path.parent) else Path("."), sidecar.machine_file,
                       where(str(path), None, "machine_file"))
    try:
        text = json.dumps(sidecar.to_dict(), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    except (TypeError, ValueError) as exc:
        raise RunFileError(f"{path}: notes cannot be written as JSON ({exc})") from exc
    with atomic_output(path, force=force) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return path


def run_metadata(run_path: str | os.PathLike) -> TestMetadata:
    """The test metadata in the sidecar of run file ``run_path`` (empty without a sidecar).

    Raises
    ------
    RunFileError
        The sidecar exists but is not valid.
    """
    side = sidecar_path(run_path)
    if not side.is_file():
        return TestMetadata()
    return read_sidecar(side).metadata
