"""Track a recorded run end to end: speed, order spectrum, order map, cuts, aliases.

One function, :func:`track_run`, strings the angle layer together the way an analyst would:
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
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.angle import (OrderAnalysis, PulseDetector, ShaftAngle, envelope_order_spectrum,
                             find_order_peaks, iter_resample_to_angle, order_cut, frequency_map,
                             tacho_angle)
from workbench.angle.tracking import iter_resample_to_angle_channels, resolve_threads
from workbench.angle.matching import identify_order_map, unmatched_ridges
from workbench.angle.pulse_timing import speed_tolerance_for
from workbench.errors import FoldlineWarning, InputError, RunFileError, TachoError
from workbench.runs.files import read_run
from workbench.runs.run import Run

__all__ = ["RunAnalysis", "MultiRunAnalysis", "track_run", "track_channels", "vibration_channels",
           "run_speed", "run_speed_estimate", "SPEED_OPTIONS", "CHUNK_S", "CHANNEL_KEYS"]

#: Seconds of the record read per chunk while streaming.
CHUNK_S = 8.0

#: Allowed samples per revolution.  2**16 resolves orders up to about 25,000, beyond any
#: machine line; larger values only make the tracker's blocks (revolutions x samples_per_rev
#: values each) exhaust memory.
MIN_SAMPLES_PER_REV = 8
MAX_SAMPLES_PER_REV = 1 << 16

#: Revolutions per block when neither the caller nor a plan gives an order resolution.
DEFAULT_REVS_PER_BLOCK = 16

#: Most rows an order map or frequency map keeps; longer records are averaged (on power)
#: into this many rpm bins while they stream, so a map's memory does not grow with the record.
MAX_MAP_ROWS = 800

#: Longest time block of the frequency map, samples (frequency bins = half of it).
MAX_RF_NPERSEG = 8192


def _map_bins(angle, n_blocks: float):
    """rpm bin edges for a streamed map when a record has more blocks than MAX_MAP_ROWS."""
    if n_blocks <= MAX_MAP_ROWS:
        return None
    lo, hi = float(angle.rpm_min), float(angle.rpm_max)
    return np.linspace(lo, max(hi, lo * (1 + 1e-9) + 1e-9), MAX_MAP_ROWS + 1)


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
    rf_map : RpmFrequencyMap or None
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
    doubted : pandas.DataFrame
        Tacho pulses the processing doubted (time_s, reason).
    log : tuple of str
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


def _peaks_frame(peaks) -> pd.DataFrame:
    return pd.DataFrame(
        {"order": np.asarray(peaks.order), "amplitude": np.asarray(peaks.amplitude),
         "prominence_db": np.asarray(peaks.prominence_db)}
    )


def _channel_index(run: Run, ch, option: str) -> int:
    """Row of channel ``ch``; an unknown one names the run file and the option it came from."""
    try:
        return run.channel_index(ch)
    except InputError as exc:
        raise InputError(f"{run.source or '<memory>'}: {option}: {exc}") from None


def _vibration_channel(run: Run, channel, speed_channel=None):
    if channel is not None:
        return _channel_index(run, channel, "--channel")
    tacho = run.tacho_index
    skip = None if speed_channel is None else _channel_index(run, speed_channel, "--speed-channel")
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
            skip = {None if t is None else _channel_index(run, t, "--tacho")}
            if speed_channel is not None:
                skip.add(_channel_index(run, speed_channel, "--speed-channel"))
            rows = tuple(i for i in range(run.n_channels) if i not in skip)
            if not rows:
                raise RunFileError(f"{run.source}: --channel all: the run has only the tacho "
                                   "channel; there is no vibration channel to track")
            return rows
        channels = (channels,)
    rows = tuple(dict.fromkeys(_channel_index(run, c, "--channel") for c in channels))
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
    InputError
        Two speed sources at once; ``speed_order`` without ``speed_range`` (or the reverse);
        ``speed_channel`` without ``speed_scale`` (or the reverse); bad values.
    """
    if chunk is None:
        chunk = max(4096, int(CHUNK_S * run.rate_hz))
    given = {"--speed-order": speed_order, "--speed-channel": speed_channel, "--rpm": rpm,
             "--speed-table": speed_table, "--tacho": tacho,
             "--pulses-per-rev": pulses_per_rev, "--missing-pulses": missing_pulses}
    if speed_order is None and speed_range is not None:
        raise InputError("--speed-range needs --speed-order (the order whose ridge gives the "
                         "speed)")
    if speed_channel is None and speed_scale is not None:
        raise InputError("--speed-scale needs --speed-channel (the channel it scales)")
    if speed_order is None and speed_channel is None:
        return None
    from workbench.angle.vibration_speed import speed_from_channel, speed_from_vibration

    mine = "--speed-order" if speed_order is not None else "--speed-channel"
    others = [k for k, v in given.items() if v is not None and k != mine]
    if others:
        raise InputError(f"{mine} and {others[0]} give the speed twice; allowed: one speed "
                         "source (tacho options, --speed-order, --speed-channel, --rpm or "
                         "--speed-table)")
    source = run.source or "<memory>"
    if speed_order is not None:
        if speed_range is None:
            raise InputError(f"--speed-order {speed_order:g} needs --speed-range LO,HI (the rpm "
                             "range to search)")
        vib = run.channels[_vibration_channel(run, channel)].name
        try:
            return speed_from_vibration(lambda: run.iter_chunks(vib, chunk), run.rate_hz,
                                        order=float(speed_order), rpm_range=speed_range)
        except InputError as exc:
            raise InputError(f"{source}: channel '{vib}': --speed-order: {exc}") from None
    if speed_scale is None:
        raise InputError(f"--speed-channel {speed_channel} needs --speed-scale RPM_PER_UNIT "
                         "(rpm per unit of the channel)")
    name = run.channels[_channel_index(run, speed_channel, "--speed-channel")].name
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
    if rpm is not None and speed_table is not None:
        raise InputError("give either --rpm or --speed-table, not both")
    if rpm is not None:
        rpm = float(rpm)
        if not math.isfinite(rpm) or rpm <= 0:
            raise InputError(f"--rpm {rpm!r}: must be a positive speed in rpm")
        return ShaftAngle.from_rpm(rpm, run.duration_s), "rpm"
    if speed_table is not None:
        from workbench.sampling import read_speed_table

        t, r = read_speed_table(speed_table)
        return ShaftAngle.from_speed_table(t, r), "speed table"
    tacho_ch = tacho if tacho is not None else run.tacho
    if tacho_ch is None:
        raise RunFileError(
            f"{run.source}: no tacho channel: name one with --tacho (or tacho_channel in the "
            "sidecar), or give the speed with --rpm, --speed-table, --speed-order K "
            "--speed-range LO,HI (from the vibration) or --speed-channel CH --speed-scale S"
        )
    name = run.channels[_channel_index(run, tacho_ch, "--tacho")].name
    ppr = run.pulses_per_rev if pulses_per_rev is None else int(pulses_per_rev)
    miss = run.missing_pulses if missing_pulses is None else int(missing_pulses)
    try:
        detector = PulseDetector(run.rate_hz)
        for piece in run.iter_chunks(name, chunk):
            detector.feed(piece)
        pulses = detector.finish()
        return tacho_angle(pulses, pulses_per_rev=ppr, missing_pulses=miss,
                           speed_tolerance=speed_tolerance, sample_rate_hz=run.rate_hz), "tacho"
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


def track_run(
    run_or_path,
    *,
    machine=None,
    channel=None,
    tacho=None,
    pulses_per_rev=None,
    missing_pulses=None,
    rpm=None,
    speed_table=None,
    speed_tolerance=None,
    speed_order=None,
    speed_range=None,
    speed_channel=None,
    speed_scale=None,
    rate_hz=None,
    samples_per_rev=256,
    revs_per_block=None,
    max_order=None,
    envelope_hz=None,
    protect=True,
    cut_orders=(),
    cut_bandwidth_orders=None,
    rf_map=True,
    progress=None,
    threads=1,
    overall_band_hz=None,
    aa_filter=None,
) -> RunAnalysis:
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
    return track_channels(
        run_or_path, channels=None if channel is None else (channel,), machine=machine,
        rate_hz=rate_hz, samples_per_rev=samples_per_rev, revs_per_block=revs_per_block,
        max_order=max_order, envelope_hz=envelope_hz, protect=protect, cut_orders=cut_orders,
        cut_bandwidth_orders=cut_bandwidth_orders, rf_map=rf_map, progress=progress,
        threads=threads, tacho=tacho, pulses_per_rev=pulses_per_rev,
        missing_pulses=missing_pulses, rpm=rpm, speed_table=speed_table,
        speed_tolerance=speed_tolerance, speed_order=speed_order, speed_range=speed_range,
        speed_channel=speed_channel, speed_scale=speed_scale,
        overall_band_hz=overall_band_hz, aa_filter=aa_filter,
    ).channels[0]


def track_channels(
    run_or_path,
    *,
    channels=None,
    machine=None,
    rate_hz=None,
    samples_per_rev=256,
    revs_per_block=None,
    max_order=None,
    envelope_hz=None,
    protect=True,
    cut_orders=(),
    cut_bandwidth_orders=None,
    rf_map=True,
    progress=None,
    threads=None,
    overall_band_hz=None,
    aa_filter=None,
    **speed_options,
) -> MultiRunAnalysis:
    """Track one or many channels of a run in the angle domain against one speed, and analyse
    each.

    The speed and the angle instants are computed once (:func:`run_speed`); every block's
    alias-protection filter, angle instants and interpolation weights are made once and
    applied to each channel, and the channels are read together in one pass over the file.
    Each channel's result is the same as tracking it alone.

    Parameters
    ----------
    run_or_path : Run or path-like
        The run, or its file (WAV, CSV, NPZ or MAT, with its sidecar).
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
    run = run_or_path if isinstance(run_or_path, Run) else read_run(run_or_path, rate_hz=rate_hz)
    source = run.source or "<memory>"
    spr = int(samples_per_rev)
    if not MIN_SAMPLES_PER_REV <= spr <= MAX_SAMPLES_PER_REV or spr != samples_per_rev:
        raise InputError(f"--samples-per-rev {samples_per_rev!r}: must be a whole number from "
                         f"{MIN_SAMPLES_PER_REV} to {MAX_SAMPLES_PER_REV}")
    rpb = DEFAULT_REVS_PER_BLOCK if revs_per_block is None else float(revs_per_block)
    if not math.isfinite(rpb) or rpb <= 0:
        raise InputError(f"--revs-per-block {revs_per_block!r}: must be a positive number of revolutions")
    top = spr / 2.56 if max_order is None else float(max_order)
    if envelope_hz is not None:
        lo, hi = (float(v) for v in envelope_hz)
        if not (0 < lo < hi < run.rate_hz / 2):
            raise InputError(
                f"--envelope {lo:g},{hi:g}: the band must satisfy 0 < lo < hi < Nyquist ({run.rate_hz / 2:g} Hz)"
            )
        envelope_hz = (lo, hi)
    unknown = sorted(set(speed_options) - set(SPEED_OPTIONS))
    if unknown:
        raise InputError(f"track_channels: unknown option {unknown[0]!r}; allowed: the tracking "
                         f"options and the speed options {', '.join(SPEED_OPTIONS)}")
    threads = resolve_threads(threads, "--threads")
    chunk = max(4096, int(CHUNK_S * run.rate_hz))
    speed_options = dict(speed_options)
    if speed_options.get("speed_tolerance") is None:
        speed_options["speed_tolerance"] = speed_tolerance_for(top, rpb)
    rows = vibration_channels(run, channels, tacho=speed_options.get("tacho"),
                              speed_channel=speed_options.get("speed_channel"))
    names = [run.channels[i].name for i in rows]  # Run methods take names or 1-based indices
    estimate = run_speed_estimate(
        run, chunk=chunk, channel=names[0],
        **{k: v for k, v in speed_options.items() if k != "speed_tolerance"})
    if estimate is not None:
        angle, speed_source = estimate.angle, estimate.source
    else:
        angle, speed_source = run_speed(run, chunk=chunk, **speed_options)
    rpm, speed_table = speed_options.get("rpm"), speed_options.get("speed_table")
    if not angle.rpm_max / 60.0 < run.rate_hz / 2.0:  # even order 1 would lie above Nyquist
        given = {"rpm": f"--rpm {rpm}", "speed table": f"--speed-table {speed_table}"}.get(
            speed_source, f"{source}: {speed_source}")
        raise InputError(f"{given}: the speed reaches {angle.rpm_max:g} rpm, where order 1 "
                         f"({angle.rpm_max / 60.0:g} Hz) lies above the run's Nyquist frequency "
                         f"{run.rate_hz / 2.0:g} Hz; allowed: speeds below "
                         f"{30.0 * run.rate_hz:g} rpm")
    head = [f"speed from {speed_source}: {angle.rpm_min:.1f}-{angle.rpm_max:.1f} rpm, {angle.revolutions:.1f} rev"]
    if getattr(angle, "timing", None) is not None:
        head.append(f"tacho timing: {angle.timing.describe()}")
        if math.isfinite(angle.timing.angle_uncertainty_rev):
            head.append(f"phase uncertainty at order {top:g}: "
                        f"{360.0 * top * angle.timing.angle_uncertainty_rev:.2g} deg RMS")
    if len(angle.stretches) > 1:
        head.append("speed unknown between the stretches " + ", ".join(
            f"{a:.3f}-{b:.3f} s" for a, b in angle.stretches) + "; each tracked on its own")
    if estimate is not None:
        head.append(f"speed: {estimate.method}; uncertainty "
                    f"{100 * estimate.speed_uncertainty:.3g} % RMS")
    n_total = run.n_samples

    def chunks():
        done = 0
        # Single precision: the tracker filters in single precision (rounding -140 dB).
        for piece in run.iter_chunks_many(names, chunk, dtype=np.float32):
            done += piece.shape[-1]
            yield piece
            if progress is not None:
                progress(min(1.0, done / n_total))

    # Blocks overlap by half (OrderAnalysis default): about 2 x revolutions / rpb of them.
    accs = [OrderAnalysis(revs_per_block=rpb, max_order=top, keep_map=True,
                          rpm_bins=_map_bins(angle, 2.0 * angle.revolutions / rpb))
            for _ in names]
    # Several channels on several threads: each channel's spectra are fed on the pool (in
    # order, one task per channel and piece), while the tracker's own pool works ahead.
    pool = None
    if threads > 1 and len(accs) > 1:
        from concurrent.futures import ThreadPoolExecutor

        pool = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="foldline-spectra")
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", FoldlineWarning)
            for pieces in iter_resample_to_angle_channels(chunks, run.rate_hz, angle, samples_per_rev=spr,
                                                    protect=protect, threads=threads):
                if pool is None:
                    for acc, piece in zip(accs, pieces):
                        acc.feed(piece)
                else:
                    for f in [pool.submit(acc.feed, piece) for acc, piece in zip(accs, pieces)]:
                        f.result()
            spectra = [acc.spectrum() for acc in accs]
            omaps = [acc.order_map() for acc in accs]
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    track_warnings = [f"warning: {w.message}" for w in caught]
    mach = _machine_for(run, machine)
    lines = () if mach is None else tuple(mach.lines())
    doubted = angle.doubted.to_frame() if hasattr(angle.doubted, "to_frame") else pd.DataFrame(
        {"time_s": [], "reason": []}
    )
    out = []
    for row, vib, acc, spectrum, omap in zip(rows, names, accs, spectra, omaps):
        log = head + track_warnings + list(acc.log)
        out.append(_analyse_channel(
            run, vib, run.channels[row].unit, angle, speed_source, spr, rpb, spectrum, omap, log,
            mach=mach, lines=lines, doubted=doubted, envelope_hz=envelope_hz, cut_orders=cut_orders,
            cut_bandwidth_orders=cut_bandwidth_orders, rf_map=rf_map, chunk=chunk, protect=protect,
            source=source, estimate=estimate, overall_band_hz=overall_band_hz,
            aa_filter=aa_filter))
    return MultiRunAnalysis(tuple(out), threads=threads)


def _analyse_channel(run, vib, unit, angle, speed_source, spr, rpb, spectrum, omap, log, *, mach,
                     lines, doubted, envelope_hz, cut_orders, cut_bandwidth_orders, rf_map, chunk,
                     protect, source, estimate=None, overall_band_hz=None,
                     aa_filter=None) -> RunAnalysis:
    """Peaks, cuts, envelope, frequency map and identification of one tracked channel."""
    peaks = _peaks_frame(find_order_peaks(spectrum, n=10))
    orders = tuple(cut_orders) if cut_orders else tuple(
        dict.fromkeys([1.0] + [round(float(o), 3) for o in peaks["order"].head(3) if o > 0])
    )
    cuts = []
    for o in orders:
        if o + 0.5 * (cut_bandwidth_orders or 4.0 / spectrum.revs_per_block) <= omap.order[-1]:
            cuts.append(order_cut(omap, o, bandwidth_orders=cut_bandwidth_orders))
    envelope, env_peaks = None, pd.DataFrame({"order": [], "amplitude": [], "prominence_db": []})
    if envelope_hz is not None:
        x = np.asarray(run.channel(vib), dtype=float)
        envelope = envelope_order_spectrum(x, run.rate_hz, angle, band_hz=envelope_hz, revs_per_block=rpb)
        del x
        env_peaks = _peaks_frame(find_order_peaks(envelope, n=10))
        log.append(f"envelope order spectrum, band {envelope_hz[0]:g}-{envelope_hz[1]:g} Hz")
    rfm = None
    if rf_map:
        nperseg = min(MAX_RF_NPERSEG, 1 << max(8, int(round(math.log2(max(run.rate_hz * 0.5, 256.0))))))
        if run.n_samples >= 2 * nperseg:
            bins = _map_bins(angle, 2.0 * run.n_samples / nperseg)
            rfm = frequency_map(run.iter_chunks(vib, chunk), run.rate_hz, angle, nperseg=nperseg,
                                    rpm_bins=bins)
    overall = _overall(run, vib, chunk, angle, omap, rpb, overall_band_hz)
    ident = None
    if mach is not None:
        ident = identify_order_map(omap, mach, run.rate_hz, samples_per_rev=spr)
        log.append(f"identified {len(ident.table)} predicted lines, {len(ident.aliases)} of them aliases")
        unmatched = ident.unmatched
    else:
        unmatched = unmatched_ridges(omap, samples_per_rev=spr)
    from workbench.angle.validity import valid_region

    valid = valid_region(run.rate_hz, aa_filter)
    shared = _cut_band_lines(cuts, mach, run.rate_hz, log)
    return RunAnalysis(
        source=str(source),
        rate_hz=float(run.rate_hz),
        channel=vib,
        unit=unit,
        shaft_angle=angle,
        speed_source=speed_source,
        samples_per_rev=spr,
        revs_per_block=float(spectrum.revs_per_block),
        duration_s=float(run.duration_s),
        spectrum=spectrum,
        peaks=peaks,
        envelope=envelope,
        envelope_peaks=env_peaks,
        envelope_hz=envelope_hz,
        order_map=omap,
        cuts=tuple(cuts),
        rf_map=rfm,
        identification=ident,
        lines=lines,
        doubted=doubted,
        protect=bool(protect),
        log=tuple(log),
        speed_estimate=estimate,
        unmatched=unmatched,
        overall=overall,
        valid=valid,
        cut_band_lines=shared,
    )


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


def _overall(run, vib, chunk, angle, omap, rpb, band_hz):
    """Overall RMS in the order map's rpm rows; blocks short enough that each row gets one."""
    from workbench.angle.overall import default_block_samples, overall_level

    if band_hz is not None:
        lo, hi = (float(v) for v in band_hz)
        if not 0 <= lo < hi <= run.rate_hz / 2:
            raise InputError(f"--overall-band {lo:g},{hi:g}: the band must satisfy 0 <= LO < HI <= "
                             f"Nyquist ({run.rate_hz / 2:g} Hz)")
        band_hz = (lo, hi)
    # rows of the map are half a block (rpb / 2 revolutions) apart; at the top speed that is
    row_s = 0.5 * rpb * 60.0 / max(float(angle.rpm_max), 1e-9)
    n = 1 << max(8, int(math.floor(math.log2(max(run.rate_hz * row_s, 256.0)))))
    n = min(n, default_block_samples(run.rate_hz))
    if run.n_samples < n:
        return None
    return overall_level(run.iter_chunks(vib, chunk), run.rate_hz, angle, rpm_rows=omap.rpm,
                         band_hz=band_hz, block_samples=n)
