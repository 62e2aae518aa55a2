"""Test metadata of a run: what was tested, by whom, when, and where each sensor sat.

Stored in the run's JSON sidecar (see :mod:`workbench.runs.sidecar`)::

    {
      "unit_under_test": "agitator drive AD-400",
      "serial_number": "AD400-1187",
      "test_id": "FAT-2026-031",
      "operator": "J. Rivera",
      "date": "2026-11-30",
      "channels": [{"name": "vibration", "unit": "m/s^2", "sensitivity": 1.0,
                    "position": "motor DE bearing housing", "direction": "radial horizontal",
                    "sensor_type": "accelerometer, IEPE 100 mV/g"}, ...]
    }

Every field is optional text; ``date`` is an ISO 8601 date (``2026-11-30``) or date and time
(``2026-11-30T14:05``).  The report shows them in its header and the batch summary in its
columns; ``foldline report --meta KEY=VALUE`` adds or overrides one (``--meta
operator="A. Test"``, ``--meta vibration.position="gearbox input"`` for a channel's sensor).
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, replace

from workbench.checks import close_names, show
from workbench.errors import InputError

__all__ = ["TestMetadata", "SensorInfo", "META_KEYS", "SENSOR_KEYS", "META_LABELS",
           "check_date", "parse_meta_options"]

#: Run-level metadata keys (sidecar top level, ``--meta KEY=VALUE``).
META_KEYS = ("unit_under_test", "serial_number", "test_id", "operator", "date")
#: Per-channel sensor keys (sidecar ``channels[i]``, ``--meta CHANNEL.KEY=VALUE``).
SENSOR_KEYS = ("position", "direction", "sensor_type")
#: How each key is labelled for people (report header, printed summaries).
META_LABELS = {"unit_under_test": "unit under test", "serial_number": "serial number",
               "test_id": "test id", "operator": "operator", "date": "test date",
               "position": "position", "direction": "direction", "sensor_type": "sensor type"}


def check_date(value, loc: str) -> str:
    """``value`` if it is an ISO 8601 date or date and time, else InputError naming ``loc``."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{loc} = {show(value)}: must be an ISO 8601 date such as "
                         "2026-11-30 (or date and time, 2026-11-30T14:05)")
    text = value.strip()
    try:
        if len(text) == 10:
            _dt.date.fromisoformat(text)
        else:
            _dt.datetime.fromisoformat(text)
    except ValueError:
        raise InputError(f"{loc} = {show(value)}: is not a date; allowed: an ISO 8601 date "
                         "such as 2026-11-30 (or date and time, 2026-11-30T14:05)") from None
    return text


def _text(value, loc: str) -> str:
    if not isinstance(value, str):
        raise InputError(f"{loc} = {show(value)}: must be a text in quotes")
    return value.strip()


@dataclass(frozen=True)
class SensorInfo:
    """Where one channel's sensor sat and what it was.

    Parameters
    ----------
    channel : str
        The channel's name.
    position, direction, sensor_type : str
        Free text (``"motor DE bearing housing"``, ``"radial vertical"``,
        ``"accelerometer 100 mV/g"``); empty when not given.
    """

    channel: str
    position: str = ""
    direction: str = ""
    sensor_type: str = ""

    def __post_init__(self):
        for key in ("channel",) + SENSOR_KEYS:
            object.__setattr__(self, key, _text(getattr(self, key), f"channel {self.channel!r}: {key}"))

    @property
    def empty(self) -> bool:
        return not (self.position or self.direction or self.sensor_type)


@dataclass(frozen=True)
class TestMetadata:
    """Test metadata of one run (all text, empty when not given).

    Parameters
    ----------
    unit_under_test, serial_number, test_id, operator : str
    date : str
        ISO 8601 date, or date and time.
    sensors : tuple of SensorInfo
        One per channel that has sensor information.
    """

    __test__ = False  # not a pytest test class despite its name

    unit_under_test: str = ""
    serial_number: str = ""
    test_id: str = ""
    operator: str = ""
    date: str = ""
    sensors: tuple = ()

    def __post_init__(self):
        for key in META_KEYS:
            value = _text(getattr(self, key), key)
            if key == "date" and value:
                value = check_date(value, "date")
            object.__setattr__(self, key, value)
        sensors = tuple(self.sensors)
        for s in sensors:
            if not isinstance(s, SensorInfo):
                raise InputError(f"sensors: must hold SensorInfo objects, got {type(s).__name__}")
        object.__setattr__(self, "sensors", tuple(s for s in sensors if not s.empty))

    def sensor(self, channel: str) -> SensorInfo:
        """The sensor information of ``channel`` (empty when none was given)."""
        return next((s for s in self.sensors if s.channel == channel), SensorInfo(str(channel)))

    @property
    def empty(self) -> bool:
        return not any(getattr(self, k) for k in META_KEYS) and not self.sensors

    def to_dict(self) -> dict:
        """Run-level keys (all of them, empty text when not given) and ``sensors`` (a list)."""
        out = {k: getattr(self, k) for k in META_KEYS}
        out["sensors"] = [{"channel": s.channel, **{k: getattr(s, k) for k in SENSOR_KEYS}}
                          for s in self.sensors]
        return out

    def with_overrides(self, pairs, channels=()) -> TestMetadata:
        """A copy with ``(key, value)`` pairs applied (``key`` a run-level key or
        ``CHANNEL.position`` / ``.direction`` / ``.sensor_type``).

        Parameters
        ----------
        pairs : iterable of (str, str)
        channels : sequence of str, optional
            The run's channel names; when given, a sensor key must name one of them.
        """
        out = self
        for key, value in pairs:
            if key in META_KEYS:
                out = replace(out, **{key: value})
                continue
            channel, _, field_ = key.rpartition(".")
            if not channel or field_ not in SENSOR_KEYS:
                hint = close_names(key, META_KEYS + SENSOR_KEYS)
                raise InputError(
                    f"--meta {key}={value}: unknown key{f' (did you mean {hint[0]!r}?)' if hint else ''}; "
                    f"allowed: {', '.join(META_KEYS)}, or CHANNEL.{'/'.join(SENSOR_KEYS)} for a "
                    "channel's sensor (e.g. vibration.position=\"motor DE\")")
            if channels and channel not in channels:
                raise InputError(f"--meta {key}={value}: the run has no channel named {channel!r}; "
                                 f"its channels: {', '.join(channels)}")
            old = out.sensor(channel)
            new = replace(old, **{field_: value})
            rest = tuple(s for s in out.sensors if s.channel != channel)
            order = [s.channel for s in out.sensors]
            sensors = rest + (new,)
            if channel in order:  # keep the channel's place
                sensors = tuple(new if s.channel == channel else s for s in out.sensors)
            out = replace(out, sensors=sensors)
        return out


def parse_meta_options(items) -> tuple:
    """``["operator=A. Test", "vibration.position=DE"]`` -> ``(("operator", "A. Test"), ...)``.

    Raises
    ------
    InputError
        An item without ``=`` or with an empty key.
    """
    out = []
    for item in items or ():
        key, sep, value = str(item).partition("=")
        if not sep or not key.strip():
            raise InputError(f"--meta {item}: give KEY=VALUE, e.g. --meta operator=\"A. Test\" "
                             f"or --meta vibration.position=\"motor DE\"; keys: "
                             f"{', '.join(META_KEYS)}, CHANNEL.{'/'.join(SENSOR_KEYS)}")
        out.append((key.strip(), value.strip()))
    return tuple(out)
