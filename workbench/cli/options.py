"""Command-line options shared by the verbs that track runs (``track``, ``report``, ``batch``)."""

from __future__ import annotations

from workbench.errors import InputError
from workbench.textparse import parse_orders

__all__ = ["add_track_options", "track_options_from_args", "settings_from_args", "parse_orders",
           "parse_channels", "parse_threads", "option_name", "OPTION_NAMES", "FIELD_FLAGS",
           "flag_error", "add_speed_options", "speed_options_from_args"]


def _band(text: str, name: str) -> tuple:
    try:
        lo, hi = (float(v) for v in str(text).split(","))
    except ValueError:
        raise InputError(f"{name} {text!r}: give a band in Hz as LO,HI, e.g. 400,1000") from None
    if not (0 <= lo < hi):
        raise InputError(f"{name} {text!r}: need 0 <= LO < HI (Hz)")
    return lo, hi


def add_track_options(p) -> None:
    """The options that say how a run is tracked (same meaning as ``foldline track``)."""
    g = p.add_argument_group("tracking")
    g.add_argument("--channel", metavar="CH[,CH...]",
                   help="vibration channel(s): 1-based indices or names separated by commas, or "
                        "'all' (every channel but the tacho); default the first one that is not "
                        "the tacho")
    g.add_argument("--tacho", metavar="CH", help="tacho channel: 1-based index or name")
    g.add_argument("--pulses-per-rev", type=int, metavar="N",
                   help="tacho tooth positions per rev, missing ones included")
    g.add_argument("--missing-pulses", type=int, metavar="M", help="missing teeth of the tacho wheel")
    speed = g.add_mutually_exclusive_group()
    speed.add_argument("--rpm", type=float, metavar="RPM", help="constant speed in place of a tacho")
    speed.add_argument("--speed-table", metavar="CSV", help="CSV time_s,rpm in place of a tacho")
    g.add_argument("--speed-tolerance", type=float, metavar="PCT",
                   help="RMS speed uncertainty (percent) the tacho stage aims at and warns "
                        "beyond; default from the order resolution and highest order")
    add_speed_options(g, speed)
    g.add_argument("--rate", type=float, metavar="HZ", help="sample rate where the file has none")
    g.add_argument("--samples-per-rev", type=int, metavar="N", help="angle-domain samples per rev")
    g.add_argument("--revs-per-block", type=float, metavar="N", help="revolutions per FFT block")
    g.add_argument("--envelope", metavar="LO,HI", help="envelope order spectrum of this band, Hz")
    g.add_argument("--cut-orders", metavar="O1,O2", help="orders to cut against speed")
    g.add_argument("--cut-bandwidth", type=float, metavar="ORDERS", help="width of each order cut")
    g.add_argument("--threads", metavar="N",
                   help="threads tracking each run (default: the machine's cores; batch: 1 per "
                        "worker)")


#: The command-line option of each tracking setting (a field of
#: :class:`~workbench.runs.settings.TrackingSettings`) and of the other keys of
#: :func:`track_options_from_args`: the one table between options and fields.
FIELD_FLAGS = {
    "channels": "--channel", "rate_hz": "--rate", "threads": "--threads",
    "tacho": "--tacho", "pulses_per_rev": "--pulses-per-rev", "missing_pulses": "--missing-pulses",
    "rpm": "--rpm", "speed_table": "--speed-table", "speed_tolerance": "--speed-tolerance",
    "speed_order": "--speed-order", "speed_range": "--speed-range",
    "speed_channel": "--speed-channel", "speed_scale": "--speed-scale",
    "samples_per_rev": "--samples-per-rev", "revs_per_block": "--revs-per-block",
    "max_order": "--max-order", "envelope_hz": "--envelope", "cut_orders": "--cut-orders",
    "cut_bandwidth_orders": "--cut-bandwidth", "overall_band_hz": "--overall-band",
    "integrate": "--integrate", "integrate_from_hz": "--integrate-from", "protect": "--no-protect",
    "aa_filter": "--plan",
    # not tracking settings, but arguments of the core the command's options feed
    "channel": "--channel", "amplitude": "--amplitude", "db_ref": "--db", "min_hz": "--integrate-from",
    "labels": "--labels",
}
#: Keys whose option name is not ``--`` plus the key with dashes (kept for callers).
OPTION_NAMES = {k: v for k, v in FIELD_FLAGS.items() if v != "--" + k.replace("_", "-")}


def option_name(key: str) -> str:
    """The command-line option a tracking setting (or ``track_options_from_args`` key) comes
    from."""
    return FIELD_FLAGS.get(key, "--" + key.replace("_", "-"))


def flag_error(exc, args=None):
    """A setting's error in the command's words: ``--samples-per-rev 3: must be ...``.

    ``exc`` is a :class:`~workbench.runs.settings.SettingError` (field names); the value shown
    is the text given on the command line when ``args`` holds it.  Field names inside the
    rule (those with an underscore) are turned into their options too.  Returns an :class:`InputError`.
    """
    import re

    from workbench.checks import NO_VALUE

    def said(field, value):
        flag = option_name(field)
        if value is NO_VALUE:
            return flag
        given = getattr(args, flag.lstrip("-").replace("-", "_"), None) if args is not None else None
        if isinstance(given, float):
            given = f"{given:g}"
        if given is None:
            given = ",".join(f"{v:g}" if isinstance(v, float) else str(v) for v in value) \
                if isinstance(value, (tuple, list)) else (f"{value:g}" if isinstance(value, float)
                                                          else str(value))
        return f"{flag} {given}"

    head = said(exc.field, exc.value)
    also = getattr(exc, "also", None)
    if also is not None:   # a conflict of two settings: both options named
        head += " and " + said(*also)
    # field names written with an underscore ("speed_range") are not words of a sentence
    named = sorted((k for k in FIELD_FLAGS if "_" in k), key=len, reverse=True)
    problem = re.sub(r"\b(" + "|".join(named) + r")\b", lambda m: FIELD_FLAGS[m.group(1)],
                     exc.problem)
    return InputError(f"{head}: {problem}")


def settings_from_args(args, base=None, **more):
    """The :class:`~workbench.runs.settings.TrackingSettings` of the parsed options (on top of
    ``base``, e.g. a plan's), and the options that are not settings (``channels``,
    ``rate_hz``).  A bad value raises :class:`InputError` naming the option."""
    from workbench.runs.settings import SettingError, TrackingSettings

    opts = track_options_from_args(args)
    other = {k: opts.pop(k) for k in ("channels", "rate_hz") if k in opts}
    opts.update({k: v for k, v in more.items() if v is not None})
    try:
        return TrackingSettings.from_options(base, **opts), other
    except SettingError as exc:
        raise flag_error(exc, args) from None


def track_options_from_args(args) -> dict:
    """``track_run`` keyword options from the parsed tracking options (None left out)."""
    opts = {
        "channels": parse_channels(args.channel),
        "threads": parse_threads(args.threads),
        "tacho": _channel(args.tacho),
        "pulses_per_rev": args.pulses_per_rev,
        "missing_pulses": args.missing_pulses,
        "rpm": args.rpm,
        "speed_table": args.speed_table,
        "speed_tolerance": _percent(args.speed_tolerance, "--speed-tolerance"),
        **speed_options_from_args(args),
        "rate_hz": args.rate,
        "samples_per_rev": args.samples_per_rev,
        "revs_per_block": args.revs_per_block,
        "envelope_hz": None if args.envelope is None else _band(args.envelope, "--envelope"),
        "cut_orders": None if args.cut_orders is None else parse_orders(args.cut_orders, "--cut-orders"),
        "cut_bandwidth_orders": args.cut_bandwidth,
    }
    return {k: v for k, v in opts.items() if v is not None}


def _percent(value, name: str):
    """A percentage option as a fraction (None stays None); 0 < value < 100."""
    if value is None:
        return None
    if not 0 < value < 100:
        raise InputError(f"{name} {value:g}: give a percentage between 0 and 100, e.g. 0.05")
    return value / 100.0


def add_speed_options(group, exclusive) -> None:
    """Speed without a tacho: ``--speed-order K --speed-range LO,HI`` (from the vibration) and
    ``--speed-channel CH --speed-scale RPM_PER_UNIT`` (an analogue speed channel).

    ``--speed-order`` and ``--speed-channel`` go in ``exclusive`` (with the other stand-ins for a
    tacho), their companions in ``group``.
    """
    exclusive.add_argument("--speed-order", type=float, metavar="K",
                           help="speed from the vibration: the order whose ridge gives it")
    group.add_argument("--speed-range", metavar="LO,HI",
                       help="rpm range searched for --speed-order, e.g. 600,3600")
    exclusive.add_argument("--speed-channel", metavar="CH",
                           help="speed from an analogue speed channel (a drive's rpm output)")
    group.add_argument("--speed-scale", type=float, metavar="RPM_PER_UNIT",
                       help="rpm per unit of --speed-channel, e.g. 600 (rpm per volt)")


def speed_options_from_args(args) -> dict:
    """``speed_order``, ``speed_range``, ``speed_channel``, ``speed_scale`` as given (or None)."""
    return {
        "speed_order": args.speed_order,
        "speed_range": None if args.speed_range is None else _rpm_range(args.speed_range),
        "speed_channel": _channel(args.speed_channel),
        "speed_scale": args.speed_scale,
    }


def _rpm_range(text: str) -> tuple:
    try:
        lo, hi = (float(v) for v in str(text).split(","))
    except ValueError:
        raise InputError(f"--speed-range {text!r}: give the rpm range to search as LO,HI, e.g. "
                         "600,3600") from None
    if not (0 < lo < hi < float("inf")):
        raise InputError(f"--speed-range {text!r}: need 0 < LO < HI (rpm)")
    return lo, hi


def parse_channels(text):
    """``--channel`` as given: None; ``"all"``; or a tuple of channels, each a 1-based index
    (digits, an int) or a name (text).  ``"1,3,4"`` -> (1, 3, 4); ``"accel x,3"`` ->
    ("accel x", 3).

    Raises
    ------
    InputError
        An empty entry, an index below 1, or ``all`` mixed with other entries.
    """
    if text is None:
        return None
    s = str(text).strip()
    if s.lower() == "all":
        return "all"
    items = [v.strip() for v in s.split(",")]
    hint = "give 1-based channel indices or names separated by commas (e.g. 1,3,4), or all"
    if not s or any(not v for v in items):
        raise InputError(f"--channel {text!r}: empty entry; {hint}")
    out = []
    for v in items:
        if v.lower() == "all":
            raise InputError(f"--channel {text!r}: 'all' cannot be mixed with other channels; {hint}")
        if v.isdigit():
            if int(v) < 1:
                raise InputError(f"--channel {text!r}: channel {v} is out of range; channels are "
                                 f"numbered from 1; {hint}")
            out.append(int(v))
        else:
            out.append(v)
    return tuple(dict.fromkeys(out))


def parse_threads(text):
    """``--threads`` as given: None (the default: the machine's cores) or an int >= 1."""
    if text is None:
        return None
    s = str(text).strip()
    if not s.isdigit() or int(s) < 1:
        raise InputError(f"--threads {text!r}: give a whole number of threads, 1 or more")
    return int(s)


def _channel(text):
    """A channel as given: a 1-based index (digits) becomes an int, a name stays text."""
    if text is None:
        return None
    s = str(text).strip()
    return int(s) if s.isdigit() else s
