"""Track a recorded run end to end: speed, order spectrum, order map, cuts, aliases.

One function, :func:`track_run`, strings the angle layer together the way an analyst would
(stage by stage, :class:`~workbench.runs.pipeline.TrackingPipeline`, with the settings of a
:class:`~workbench.runs.settings.TrackingSettings`):
the speed from the tacho (or from a known speed), computed order tracking with alias
protection, the averaged order spectrum and the order map from the same stream, order cuts,
an envelope order spectrum on request, the frequency map, and, when the machine is known,
the identification of measured ridges with predicted lines (folded ones included).  The
vibration channel is streamed chunk by chunk, so memory does not grow with the record's
length beyond the outputs (the envelope, which needs a forward-backward filter over the whole
channel, is the exception and is only computed on request).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, fields
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.angle import PulseDetector, ShaftAngle, tacho_angle
from workbench.errors import FoldlineWarning, InputError, RunFileError, TachoError
from workbench.runs.run import Run
from workbench.checks import FieldError, is_number
from workbench.runs.settings import SettingError, TrackingSettings, check_speed_sources, usable_max_order

__all__ = ["RunAnalysis", "MultiRunAnalysis", "track_run", "track_channels", "vibration_channels",
           "run_speed", "run_speed_estimate", "SPEED_OPTIONS", "CHUNK_S", "CHANNEL_KEYS"]

#: Seconds of the record read per chunk while streaming.
CHUNK_S = 8.0
#: The tracking settings' names, accepted as keyword options by :func:`track_run`.
_SETTING_NAMES = tuple(f.name for f in fields(TrackingSettings))


@dataclass(frozen=True, eq=False)
class RunAnalysis:
    """Everything :func:`track_run` found in one run.

    Attributes
    ----------
    source : str
        The run file (or ``"<memory>"``).
    rate_hz : float
    channel : str
        Name of the vibration channel analysed; ``unit`` its unit.
    unit : str
    shaft_angle : ShaftAngle
        Speed and angle of the reference shaft against time.
    speed_source : str
        ``"tacho"``, ``"rpm"``, ``"speed table"``, ``"vibration"`` or ``"channel"``.
    samples_per_rev, revs_per_block : int, float
    duration_s : float
    spectrum : OrderSpectrum
        Averaged over the run (window-corrected peak amplitude, channel units).
    peaks : pandas.DataFrame
        ``order, amplitude, prominence_db``, strongest first.
    envelope : OrderSpectrum or None
    envelope_peaks : pandas.DataFrame
    envelope_hz : tuple or None
    order_map : OrderMap
    cuts : tuple of OrderCut
    rf_map : FrequencyMap or None
    identification : Identification or None
    lines : tuple of Line
        The machine's predicted lines the identification used (empty without a machine).
    unmatched : pandas.DataFrame or None
        Measured ridges no predicted line explains, joined into lines
        (:func:`~workbench.angle.ridges.group_ridges`); without a machine, every measured line.
    overall : OverallLevel or None
        Overall RMS of the channel against speed, in the order map's rpm rows
        (:func:`~workbench.angle.overall.overall_level`).
    valid : ValidRegion or None
        The frequencies measured faithfully (:func:`~workbench.angle.validity.valid_region`:
        the plan's filter's usable edge, or Nyquist).
    cut_band_lines : tuple of dict
        Predicted lines other than a cut's own inside its band (``cut_order, line, order,
        zone, rpm_min, rpm_max``): the cut sums them.
    scaling : AmplitudeScaling or None
        Set by :func:`~workbench.runs.scaled.scaled_analysis` when the amplitudes are shown
        RMS, in dB or integrated (``unit`` is then the shown unit, ``channel_unit`` the
        channel's own).
    settings : TrackingSettings or None
        The settings the run was tracked with (``cut_orders`` as cut, after the default rule).
    max_order : float or None
        The highest order kept (:attr:`top_order`).
    doubted : pandas.DataFrame
        Tacho pulses the processing doubted (time_s, reason).
    log : tuple of (str, str, dict)
        Processing log in the run's shape (:data:`~workbench.runs.run.LogEntry`): the run's own
        entries (reading it, ...) then each stage's (``speed``, ``angle``, ``spectra``,
        ``cuts``, ``identify``).
    speed_estimate : SpeedEstimate or None
        For the speed sources ``"vibration"`` and ``"channel"``: the speed on its time grid with
        its uncertainty per point.
    """

    source: str
    rate_hz: float
    channel: str
    unit: str
    shaft_angle: object
    speed_source: str
    samples_per_rev: int
    revs_per_block: float
    duration_s: float
    spectrum: object
    peaks: pd.DataFrame
    envelope: object
    envelope_peaks: pd.DataFrame
    envelope_hz: tuple | None
    order_map: object
    cuts: tuple
    rf_map: object
    identification: object
    doubted: pd.DataFrame
    lines: tuple = ()
    protect: bool = True
    log: tuple = field(default_factory=tuple)
    speed_estimate: object = None
    unmatched: object = None
    overall: object = None
    valid: object = None
    cut_band_lines: tuple = ()
    scaling: object = None
    channel_unit: str | None = None
    settings: object = None
    max_order: float | None = None

    @property
    def top_order(self) -> float:
        """Highest order kept in the spectrum and the map (the figures' order range)."""
        if self.max_order is not None:
            return float(self.max_order)
        return usable_max_order(self.samples_per_rev)

    @property
    def rpm_min(self) -> float:
        """Lowest reference speed over the run, rpm."""
        return float(self.shaft_angle.rpm_min)

    @property
    def rpm_max(self) -> float:
        """Highest reference speed over the run, rpm."""
        return float(self.shaft_angle.rpm_max)

    @property
    def revolutions(self) -> float:
        """Revolutions of the reference shaft over the tracked span."""
        return float(self.shaft_angle.revolutions)

    def channel_dict(self) -> dict:
        """This channel's entry of the multi-channel JSON (:data:`CHANNEL_KEYS`); keys whose
        analysis was not asked for (envelope, identification) are null."""
        d = self.to_dict()
        out = {"channel": d["channel"], "unit": d["unit"], "order_spectrum": d["order_spectrum"],
               "peaks": d["peaks"], "envelope_peaks": d.get("envelope_peaks"),
               "identified": d.get("identified")}
        out.update({k: d[k] for k in _CHANNEL_EXTRA if k in d})
        return out

    def to_dict(self) -> dict:
        """The JSON contract of ``foldline track``."""
        out = {
            "source": self.source,
            "channel": self.channel,
            "unit": self.unit,
            "rate_hz": self.rate_hz,
            "speed_source": self.speed_source,
            "rpm_min": self.rpm_min,
            "rpm_max": self.rpm_max,
            "revolutions": self.revolutions,
            "samples_per_rev": int(self.samples_per_rev),
            "revs_per_block": float(self.revs_per_block),
            "max_order": self.top_order,
            "order_spectrum": {
                "order": [float(v) for v in self.spectrum.order],
                "amplitude": [float(v) for v in self.spectrum.amplitude],
            },
            "peaks": [{"order": float(r.order), "amplitude": float(r.amplitude)} for r in self.peaks.itertuples()],
            "doubted_pulses": [{"time_s": float(r.time_s), "reason": str(r.reason)} for r in self.doubted.itertuples()],
        }
        if self.envelope is not None:
            out["envelope_hz"] = list(self.envelope_hz)
            out["envelope_peaks"] = [
                {"order": float(r.order), "amplitude": float(r.amplitude)} for r in self.envelope_peaks.itertuples()
            ]
        if self.identification is not None:
            t = self.identification.table
            out["identified"] = [
                {
                    "line": str(r.line),
                    "zone": int(r.zone),
                    "alias": bool(r.alias),
                    "rpm_min": float(r.rpm_min),
                    "rpm_max": float(r.rpm_max),
                    "amplitude_max": float(r.amplitude_max),
                }
                for r in t.itertuples()
            ]
        if self.unmatched is not None:
            out["unmatched"] = unmatched_records(self.unmatched)
        if self.overall is not None:
            out["overall"] = self.overall.to_dict()
        if self.valid is not None:
            out["valid_region"] = self.valid.to_dict()
        if self.cut_band_lines:
            out["cut_band_lines"] = [dict(d) for d in self.cut_band_lines]
        if self.scaling is not None:
            out["scaling"] = self.scaling.to_dict(self.channel_unit or "")
        return out


#: Keys of each entry of ``"channels"`` in the multi-channel JSON of ``foldline track``.
CHANNEL_KEYS = ("channel", "unit", "order_spectrum", "peaks", "envelope_peaks", "identified")
#: Per-channel keys added to an entry when present (each channel has its own).
_CHANNEL_EXTRA = ("unmatched", "overall", "cut_band_lines", "scaling")


@dataclass(frozen=True, eq=False)
class MultiRunAnalysis:
    """One run tracked on several channels against one speed (:func:`track_channels`).

    Attributes
    ----------
    channels : tuple of RunAnalysis
        One analysis per channel, in the order asked; they share the same ``shaft_angle``
        (the speed and the angle instants were computed once).
    threads : int
        Threads the tracking used.
    """

    channels: tuple
    threads: int = 1

    def __post_init__(self):
        if not self.channels:
            raise InputError("a multi-channel analysis needs at least one channel")
        object.__setattr__(self, "channels", tuple(self.channels))

    def __len__(self) -> int:
        return len(self.channels)

    def __iter__(self):
        return iter(self.channels)

    @property
    def first(self) -> RunAnalysis:
        """The first channel's analysis (its speed keys are every channel's)."""
        return self.channels[0]

    @property
    def channel_names(self) -> tuple:
        """Names of the channels, in order."""
        return tuple(a.channel for a in self.channels)

    def __getattr__(self, name):
        # Speed and run attributes (source, rate_hz, shaft_angle, speed_source, rpm_min,
        # samples_per_rev, doubted, ...) are the same for every channel.
        if name.startswith("_") or name == "channels":
            raise AttributeError(name)
        if name in _PER_CHANNEL:
            raise AttributeError(f"{name!r} differs between channels; read it from .channels[i]")
        return getattr(self.channels[0], name)

    def to_dict(self) -> dict:
        """The multi-channel JSON of ``foldline track``: the speed keys at the top and
        ``"channels": [{"channel", "unit", "order_spectrum", "peaks", "envelope_peaks",
        "identified"}]``."""
        top = self.channels[0].to_dict()
        for k in CHANNEL_KEYS + _CHANNEL_EXTRA:
            top.pop(k, None)
        top["channels"] = [a.channel_dict() for a in self.channels]
        return top


_PER_CHANNEL = frozenset({"channel", "unit", "spectrum", "peaks", "envelope", "envelope_peaks",
                          "order_map", "cuts", "rf_map", "identification", "log"})


def unmatched_records(table) -> list:
    """The ``"unmatched"`` list of ``foldline track --json`` from a ridge-group table."""
    def num(v):
        v = float(v)
        return v if math.isfinite(v) else None

    return [
        {"id": str(r.id), "family": str(r.family),
         "moves_with_speed": None if r.moves_with_speed is None else bool(r.moves_with_speed),
         "order": num(r.order), "hz": num(r.hz), "order_min": num(r.order_min),
         "order_max": num(r.order_max), "hz_min": num(r.hz_min), "hz_max": num(r.hz_max),
         "rpm_min": num(r.rpm_min), "rpm_max": num(r.rpm_max), "points": int(r.points),
         "amplitude_max": num(r.amplitude_max)}
        for r in table.itertuples()
    ]


def _channel_index(run: Run, ch, field: str) -> int:
    """Row of channel ``ch``; an unknown one names the setting it came from and the run file.

    ``field`` is the setting's name (``channel``, ``tacho``, ``speed_channel``): a Python call
    reads ``channel = "vibraton": not a channel of run.wav: ...``; the command names its option.
    """
    try:
        return run.channel_index(ch)
    except InputError as exc:
        raise FieldError(None, field, f"not a channel of {run.source or '<memory>'}: {exc}",
                         value=ch) from None


def _vibration_channel(run: Run, channel, speed_channel=None):
    if channel is not None:
        return _channel_index(run, channel, "channel")
    tacho = run.tacho_index
    skip = None if speed_channel is None else _channel_index(run, speed_channel, "speed_channel")
    for i in range(run.n_channels):
        if i != tacho and i != skip:
            return i
    raise RunFileError(
        f"{run.source}: the run has only the tacho channel; there is no vibration channel to track"
    )


def vibration_channels(run: Run, channels=None, *, tacho=None,
                       speed_channel=None) -> tuple[int, ...]:
    """Rows of the channels to track.

    Parameters
    ----------
    run : Run
    channels : None, "all", int, str or sequence of int / str
        None: the first channel that is not the tacho; ``"all"``: every channel but the
        tacho; else 1-based indices or names (a name wins over ``"all"`` when a channel is
        called so).  Repeats are dropped.
    tacho : int or str, optional
        The tacho channel left out by ``"all"`` (default the run's).
    speed_channel : int or str, optional
        An analogue speed channel, left out by ``"all"`` and the default.

    Returns
    -------
    tuple of int
        0-based rows, in the order given.

    Raises
    ------
    InputError
        An unknown channel (the message names ``--channel`` and lists the run's channels).
    RunFileError
        ``"all"`` (or the default) on a run with only the tacho channel.
    """
    if channels is None:
        return (_vibration_channel(run, None, speed_channel),)
    if isinstance(channels, (str, int)) and not (isinstance(channels, str)
                                                and channels in run.channel_names):
        if isinstance(channels, str) and channels.strip().lower() == "all":
            t = tacho if tacho is not None else run.tacho
            skip = {None if t is None else _channel_index(run, t, "tacho")}
            if speed_channel is not None:
                skip.add(_channel_index(run, speed_channel, "speed_channel"))
            rows = tuple(i for i in range(run.n_channels) if i not in skip)
            if not rows:
                raise RunFileError(f"{run.source}: --channel all: the run has only the tacho "
                                   "channel; there is no vibration channel to track")
            return rows
        channels = (channels,)
    rows = tuple(dict.fromkeys(_channel_index(run, c, "channel") for c in channels))
    if not rows:
        raise InputError("--channel: no channel given; name one or more (1-based index or "
                         "name), or all")
    return rows


#: Keyword options of :func:`run_speed` (and of every function that finds a run's speed).
SPEED_OPTIONS = ("tacho", "pulses_per_rev", "missing_pulses", "rpm", "speed_table",
                 "speed_tolerance", "speed_order", "speed_range", "speed_channel", "speed_scale")


def run_speed_estimate(run: Run, *, speed_order=None, speed_range=None, speed_channel=None,
                       speed_scale=None, channel=None, tacho=None, pulses_per_rev=None,
                       missing_pulses=None, rpm=None, speed_table=None, chunk=None):
    """The speed of a run found without a tacho: from an order's ridge, or a speed channel.

    Parameters
    ----------
    run : Run
    speed_order : float, optional
        The order (of the reference shaft) whose ridge in the vibration gives the speed; needs
        ``speed_range``.
    speed_range : (float, float), optional
        rpm range searched for that order.
    speed_channel : int or str, optional
        An analogue speed channel (a drive's rpm output; 1-based index or name); needs
        ``speed_scale``.
    speed_scale : float, optional
        rpm per unit of the speed channel.
    channel : int or str, optional
        The vibration channel the order is followed in; default the first channel that is not
        the tacho.
    tacho, pulses_per_rev, missing_pulses, rpm, speed_table : optional
        The other speed sources, only to refuse a second source given with these.
    chunk : int, optional
        Samples read per chunk.

    Returns
    -------
    SpeedEstimate or None
        None when neither ``speed_order`` nor ``speed_channel`` is given (the speed then comes
        from the tacho or a known speed, see :func:`run_speed`).

    Raises
    ------
    SettingError
        Two speed sources at once; ``speed_order`` without ``speed_range`` (or the reverse);
        ``speed_channel`` without ``speed_scale`` (or the reverse), naming the fields
        (:func:`~workbench.runs.settings.check_speed_sources`).
    InputError
        Bad values.
    """
    if chunk is None:
        chunk = max(4096, int(CHUNK_S * run.rate_hz))
    check_speed_sources(speed_order=speed_order, speed_range=speed_range,
                        speed_channel=speed_channel, speed_scale=speed_scale, rpm=rpm,
                        speed_table=speed_table, tacho=tacho, pulses_per_rev=pulses_per_rev,
                        missing_pulses=missing_pulses)
    if speed_order is None and speed_channel is None:
        return None
    from workbench.angle.vibration_speed import speed_from_channel, speed_from_vibration

    source = run.source or "<memory>"
    if speed_order is not None:
        vib = run.channels[_vibration_channel(run, channel)].name
        try:
            return speed_from_vibration(lambda: run.iter_chunks(vib, chunk), run.rate_hz,
                                        order=float(speed_order), rpm_range=speed_range)
        except InputError as exc:
            raise InputError(f"{source}: channel '{vib}': --speed-order: {exc}") from None
    name = run.channels[_channel_index(run, speed_channel, "speed_channel")].name
    try:
        return speed_from_channel(lambda: run.iter_chunks(name, chunk), run.rate_hz,
                                  scale=float(speed_scale))
    except InputError as exc:
        raise InputError(f"{source}: speed channel '{name}': {exc}") from None


def run_speed(run: Run, *, tacho=None, pulses_per_rev=None, missing_pulses=None, rpm=None,
              speed_table=None, chunk=None, speed_order=None, speed_range=None,
              speed_channel=None, speed_scale=None, channel=None,
              speed_tolerance=None) -> tuple[ShaftAngle, str]:
    """The reference shaft's angle against time for a run, and where the speed came from.

    Parameters
    ----------
    run : Run
    tacho : int or str, optional
        Tacho channel (1-based index or name); default the sidecar's.
    pulses_per_rev, missing_pulses : int, optional
        Tacho wheel; default the sidecar's.
    rpm : float, optional
        Constant speed standing in for a tacho, rpm.
    speed_table : path-like, optional
        CSV with columns ``time_s, rpm`` standing in for a tacho.
    speed_tolerance : float, optional
        RMS relative speed uncertainty the tacho stage aims at and warns beyond (a fraction);
        default :data:`~workbench.angle.pulse_timing.DEFAULT_SPEED_TOLERANCE`.
    chunk : int, optional
        Samples read per chunk while streaming the tacho.
    speed_order, speed_range, speed_channel, speed_scale, channel : optional
        Speed from the vibration or from a speed channel, see :func:`run_speed_estimate`.

    Returns
    -------
    (ShaftAngle, str)
        The angle, and the speed source: ``"tacho"``, ``"rpm"``, ``"speed table"``,
        ``"vibration"`` or ``"channel"``.
    """
    if chunk is None:
        chunk = max(4096, int(CHUNK_S * run.rate_hz))
    return _speed(run, tacho=tacho, pulses_per_rev=pulses_per_rev, missing_pulses=missing_pulses,
                  rpm=rpm, speed_table=speed_table, chunk=chunk, speed_order=speed_order,
                  speed_range=speed_range, speed_channel=speed_channel, speed_scale=speed_scale,
                  channel=channel, speed_tolerance=speed_tolerance)


def _speed(run: Run, *, tacho, pulses_per_rev, missing_pulses, rpm, speed_table, chunk,
           speed_order=None, speed_range=None, speed_channel=None, speed_scale=None,
           channel=None, speed_tolerance=None):
    """ShaftAngle from the tacho (streamed) or from a known speed; and where it came from."""
    est = run_speed_estimate(run, speed_order=speed_order, speed_range=speed_range,
                             speed_channel=speed_channel, speed_scale=speed_scale,
                             channel=channel, tacho=tacho, pulses_per_rev=pulses_per_rev,
                             missing_pulses=missing_pulses, rpm=rpm, speed_table=speed_table,
                             chunk=chunk)
    if est is not None:
        return est.angle, est.source
    if rpm is not None:   # rpm with speed_table is refused by run_speed_estimate
        if not (is_number(rpm) and 0 < float(rpm) < math.inf):
            raise SettingError("rpm", rpm, "must be a positive speed in rpm")
        rpm = float(rpm)
        return ShaftAngle.from_rpm(rpm, run.duration_s), "rpm"
    if speed_table is not None:
        from workbench.sampling import read_speed_table

        t, r = read_speed_table(speed_table)
        return ShaftAngle.from_speed_table(t, r), "speed table"
    pulses, name = tacho_pulses(run, tacho, chunk)
    return tacho_fit(run, pulses, name, pulses_per_rev=pulses_per_rev,
                     missing_pulses=missing_pulses, speed_tolerance=speed_tolerance), "tacho"


def tacho_pulses(run: Run, tacho=None, chunk=None):
    """The tacho channel's pulse times (s), detected chunk by chunk, and the channel's name."""
    if chunk is None:
        chunk = max(4096, int(CHUNK_S * run.rate_hz))
    tacho_ch = tacho if tacho is not None else run.tacho
    if tacho_ch is None:
        raise RunFileError(
            f"{run.source}: no tacho channel: name one with --tacho (or tacho_channel in the "
            "sidecar), or give the speed with --rpm, --speed-table, --speed-order K "
            "--speed-range LO,HI (from the vibration) or --speed-channel CH --speed-scale S"
        )
    name = run.channels[_channel_index(run, tacho_ch, "tacho")].name
    try:
        detector = PulseDetector(run.rate_hz)
        for piece in run.iter_chunks(name, chunk):
            detector.feed(piece)
        return detector.finish(), name
    except (TachoError, InputError) as exc:  # say which file and channel the speed came from
        raise type(exc)(f"{run.source or '<memory>'}: tacho channel '{name}': {exc}") from None


def tacho_fit(run: Run, pulses, name, *, pulses_per_rev=None, missing_pulses=None,
              speed_tolerance=None) -> ShaftAngle:
    """The shaft angle through a run's tacho pulses (the wheel defaults to the sidecar's)."""
    ppr = run.pulses_per_rev if pulses_per_rev is None else int(pulses_per_rev)
    miss = run.missing_pulses if missing_pulses is None else int(missing_pulses)
    try:
        return tacho_angle(pulses, pulses_per_rev=ppr, missing_pulses=miss,
                           speed_tolerance=speed_tolerance, sample_rate_hz=run.rate_hz)
    except (TachoError, InputError) as exc:  # say which file and channel the speed came from
        raise type(exc)(f"{run.source or '<memory>'}: tacho channel '{name}': {exc}") from None


def _machine_for(run: Run, machine):
    if machine is not None:
        if isinstance(machine, (str, Path)):
            from workbench.machine import read_machine

            return read_machine(machine)
        return machine
    if run.machine_file:
        from workbench.machine import read_machine

        # read_run has resolved the sidecar's machine_file and kept it inside its folder.
        return read_machine(run.machine_file)
    return None


def _settings_from(settings, options: dict) -> TrackingSettings:
    """The settings of a call: ``settings`` (or the defaults) with the keyword options on top."""
    unknown = sorted(set(options) - set(_SETTING_NAMES))
    if unknown:
        raise InputError(f"track_channels: unknown option {unknown[0]!r}; allowed: the fields of "
                         "TrackingSettings (" + ", ".join(_SETTING_NAMES) + ")")
    if options.get("cut_orders") == ():
        options.pop("cut_orders")
    return TrackingSettings.from_options(settings, **options)


def track_run(run_or_path, *, machine=None, channel=None, settings=None, rate_hz=None,
              progress=None, plan=None, **options) -> RunAnalysis:
    """Track one channel of a run in the angle domain and analyse it.

    The same as :func:`track_channels` with one channel; see it for the parameters
    (``channel`` is one 1-based index or name, default the first channel that is not the
    tacho).

    Returns
    -------
    RunAnalysis
    """
    if isinstance(channel, (list, tuple)) or (isinstance(channel, str)
                                              and channel.strip().lower() == "all"):
        raise InputError(f"channel {channel!r}: track_run tracks one channel; use "
                         "track_channels for several (or all)")
    options.setdefault("threads", 1)
    return track_channels(run_or_path, channels=None if channel is None else (channel,),
                          machine=machine, settings=settings, rate_hz=rate_hz,
                          progress=progress, plan=plan, **options).channels[0]


def track_channels(run_or_path, *, channels=None, machine=None, settings=None, rate_hz=None,
                   progress=None, plan=None, **options) -> MultiRunAnalysis:
    """Track one or many channels of a run in the angle domain against one speed, and analyse
    each.

    The speed and the angle instants are computed once (:func:`run_speed`); every block's
    alias-protection filter, angle instants and interpolation weights are made once and
    applied to each channel, and the channels are read together in one pass over the file.
    Each channel's result is the same as tracking it alone.

    Parameters
    ----------
    run_or_path : Run or path-like
        The run, or its file (WAV, CSV, NPZ, MAT, MF4 or HDF5, with its sidecar).
    settings : TrackingSettings, optional
        How to track (default ``TrackingSettings()``); the keyword options below, when given,
        replace its fields (they are the fields of :class:`TrackingSettings`).
    plan : Plan, optional
        For the default cut orders (:func:`~workbench.runs.settings.default_cut_orders`).
    machine : Machine or path-like, optional
        The machine, for the identification of measured ridges with predicted lines; default
        the sidecar's ``machine_file``.
    channels : None, "all", or sequence of int / str
        Vibration channels (1-based indices or names; see :func:`vibration_channels`);
        default the first channel that is not the tacho, ``"all"`` every channel but the
        tacho.
    rate_hz : float, optional
        Sample rate, where the file does not give it (CSV without time column, MAT).
    samples_per_rev : int
        Angle-domain samples per revolution, 8 to 65536 (default 256: orders up to 100
        usable).
    revs_per_block : float, optional
        Revolutions per FFT block (order resolution = 1 / revs_per_block); default 16.
    max_order : float, optional
        Highest order kept in the spectrum and the map (default samples_per_rev / 2.56).
    envelope_hz : (float, float), optional
        Demodulation band for the envelope order spectrum, Hz.
    protect : bool
        Alias protection of the order tracking (default on).
    cut_orders : sequence of float
        Orders to cut out of the map (default: order 1 and the three strongest peaks).
    cut_bandwidth_orders : float, optional
        Band summed in each cut (default 4 bins).
    rf_map : bool
        Also compute the frequency map (a second pass over the record).
    progress : callable, optional
        Called with the fraction of the record tracked so far (0..1).
    threads : int, optional
        Threads filtering and interpolating blocks (default: the machine's cores); the
        result does not depend on it.
    **speed_options
        Keyword options of :func:`run_speed` (:data:`SPEED_OPTIONS`: ``tacho``,
        ``pulses_per_rev``, ``missing_pulses``, ``rpm``, ``speed_table``, ...).
    overall_band_hz : (float, float), optional
        Band of the overall level, Hz (default: the whole band, DC removed).
    aa_filter : AntiAliasFilter, optional
        The acquisition's anti-alias filter (a plan's ``filter``): its usable edge bounds the
        valid region of the results (default: Nyquist of the run's rate).

    Returns
    -------
    MultiRunAnalysis
        One :class:`RunAnalysis` per channel, in the order asked.

    References
    ----------
    .. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking", Mechanical
       Systems and Signal Processing 11(2):187-205, 1997.
    .. [2] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A tutorial",
       Mechanical Systems and Signal Processing 25(2):485-520, 2011.
    """
    from workbench.runs.pipeline import TrackingPipeline

    st = _settings_from(settings, options)
    pipe = TrackingPipeline(run_or_path, st, machine=machine, plan=plan, channels=channels,
                            rate_hz=rate_hz, progress=progress)
    return pipe.analysis()


def _cut_band_lines(cuts, mach, rate_hz, log) -> tuple:
    """Predicted lines inside each cut's band; each one warned about once."""
    if mach is None or not cuts:
        return ()
    from workbench.angle.validity import lines_in_cut_band

    lines = mach.lines()
    found = []
    for cut in cuts:
        # a line within 1/16 of the band of the centre is the cut's own (cut orders are rounded)
        here = [{"cut_order": float(cut.order), **d}
                for d in lines_in_cut_band(lines, rate_hz, cut.order, cut.bandwidth_orders, cut.rpm,
                                           own_tolerance=cut.bandwidth_orders / 16.0)]
        found.extend(here)
        brief = sum(1 for d in here if d["rpm_max"] <= d["rpm_min"])  # crossing within one row
        here = [d for d in here if d["rpm_max"] > d["rpm_min"]]
        if not here:
            continue
        here.sort(key=lambda d: d["rpm_min"] - d["rpm_max"])  # longest stay in the band first

        def one(d):
            where = f"order {d['order']:g}" if d["order"] is not None else "fixed line"
            where += f", folded (zone {d['zone']})" if d["zone"] else ""
            return f"'{d['line']}' ({where}) at {d['rpm_min']:.0f}-{d['rpm_max']:.0f} rpm"

        more = len(here) - 3
        msg = (f"order cut {cut.order:g} (band +-{cut.bandwidth_orders / 2:g}): "
               f"{len(here)} other predicted line{'s lie' if len(here) > 1 else ' lies'} inside the band: "
               + "; ".join(one(d) for d in here[:3]) + (f"; and {more} more" if more > 0 else "")
               + (f" (and {brief} folded line{'s' if brief > 1 else ''} crossing it within one speed row)"
                  if brief else "")
               + "; the cut sums them there (narrow it with --cut-bandwidth, or separate the lines "
               "with foldline extract)")
        warnings.warn(msg, FoldlineWarning, stacklevel=3)
        log.append(f"warning: {msg}")
    return tuple(found)
