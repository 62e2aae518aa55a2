"""Track a recorded run end to end: speed, order spectrum, order map, cuts, aliases.

One function, :func:`track_run`, strings the angle layer together the way an analyst would:
the speed from the tacho (or from a known speed), computed order tracking with alias
protection, the averaged order spectrum and the order map from the same stream, order cuts,
an envelope order spectrum on request, the rpm-frequency map, and, when the machine is known,
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
                             find_order_peaks, iter_order_track, order_cut, rpm_frequency_map,
                             tacho_angle)
from workbench.angle.matching import identify_order_map
from workbench.angle.tacho import speed_tolerance_for
from workbench.errors import FoldlineWarning, InputError, RunFileError, TachoError
from workbench.runs.files import read_run
from workbench.runs.run import Run

__all__ = ["RunAnalysis", "track_run", "run_speed", "SPEED_OPTIONS", "CHUNK_S"]

#: Seconds of the record read per chunk while streaming.
CHUNK_S = 8.0

#: Allowed samples per revolution.  2**16 resolves orders up to about 25,000, beyond any
#: machine line; larger values only make the tracker's blocks (revolutions x samples_per_rev
#: values each) exhaust memory.
MIN_SAMPLES_PER_REV = 8
MAX_SAMPLES_PER_REV = 1 << 16

#: Revolutions per block when neither the caller nor a plan gives an order resolution.
DEFAULT_REVS_PER_BLOCK = 16

#: Most rows an order map or rpm-frequency map keeps; longer records are averaged (on power)
#: into this many rpm bins while they stream, so a map's memory does not grow with the record.
MAX_MAP_ROWS = 800

#: Longest time block of the rpm-frequency map, samples (frequency bins = half of it).
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
        ``"tacho"``, ``"rpm"`` or ``"speed table"``.
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
    doubted : pandas.DataFrame
        Tacho pulses the processing doubted (time_s, reason).
    log : tuple of str
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
        return out


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


def _vibration_channel(run: Run, channel):
    if channel is not None:
        return _channel_index(run, channel, "--channel")
    tacho = run.tacho_index
    for i in range(run.n_channels):
        if i != tacho:
            return i
    raise RunFileError(
        f"{run.source}: the run has only the tacho channel; there is no vibration channel to track"
    )


#: Keyword options of :func:`run_speed` (and of every function that finds a run's speed).
SPEED_OPTIONS = ("tacho", "pulses_per_rev", "missing_pulses", "rpm", "speed_table",
                 "speed_tolerance")


def run_speed(run: Run, *, tacho=None, pulses_per_rev=None, missing_pulses=None, rpm=None,
              speed_table=None, speed_tolerance=None, chunk=None) -> tuple[ShaftAngle, str]:
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
        default :data:`~workbench.angle.tacho.DEFAULT_SPEED_TOLERANCE`.
    chunk : int, optional
        Samples read per chunk while streaming the tacho.

    Returns
    -------
    (ShaftAngle, str)
        The angle, and the speed source: ``"tacho"``, ``"rpm"`` or ``"speed table"``.
    """
    if chunk is None:
        chunk = max(4096, int(CHUNK_S * run.rate_hz))
    return _speed(run, tacho=tacho, pulses_per_rev=pulses_per_rev, missing_pulses=missing_pulses,
                  rpm=rpm, speed_table=speed_table, speed_tolerance=speed_tolerance,
                  chunk=chunk)


def _speed(run: Run, *, tacho, pulses_per_rev, missing_pulses, rpm, speed_table, chunk,
           speed_tolerance=None):
    """ShaftAngle from the tacho (streamed) or from a known speed; and where it came from."""
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
            "sidecar), or give the speed with --rpm or --speed-table"
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
) -> RunAnalysis:
    """Track one run in the angle domain and analyse it.

    Parameters
    ----------
    run_or_path : Run or path-like
        The run, or its file (WAV, CSV, NPZ or MAT, with its sidecar).
    machine : Machine or path-like, optional
        The machine, for the identification of measured ridges with predicted lines; default
        the sidecar's ``machine_file``.
    channel : int or str, optional
        Vibration channel (1-based index or name); default the first channel that is not
        the tacho.
    tacho : int or str, optional
        Tacho channel (default: the sidecar's).
    pulses_per_rev, missing_pulses : int, optional
        Tacho wheel (tooth positions per rev including missing ones, and missing teeth);
        default the sidecar's.
    rpm : float, optional
        Constant speed standing in for a tacho, rpm.
    speed_table : path-like, optional
        CSV with columns ``time_s, rpm`` standing in for a tacho.
    speed_tolerance : float, optional
        RMS relative speed uncertainty the tacho stage aims at and warns beyond (a fraction);
        default from the error budget of the settings,
        :func:`~workbench.angle.tacho.speed_tolerance_for` (``max_order``, revs per block).
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
        Also compute the rpm-frequency map (a second pass over the record).
    progress : callable, optional
        Called with the fraction of the record tracked so far (0..1).

    Returns
    -------
    RunAnalysis

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
    chunk = max(4096, int(CHUNK_S * run.rate_hz))
    vib_index = _vibration_channel(run, channel)
    vib = run.channels[vib_index].name  # Run methods take names or 1-based indices
    unit = run.channels[vib_index].unit
    if speed_tolerance is None:
        speed_tolerance = speed_tolerance_for(top, rpb)
    angle, speed_source = _speed(
        run, tacho=tacho, pulses_per_rev=pulses_per_rev, missing_pulses=missing_pulses,
        rpm=rpm, speed_table=speed_table, chunk=chunk, speed_tolerance=speed_tolerance,
    )
    if not angle.rpm_max / 60.0 < run.rate_hz / 2.0:  # even order 1 would lie above Nyquist
        given = {"rpm": f"--rpm {rpm}", "speed table": f"--speed-table {speed_table}"}.get(
            speed_source, f"{source}: {speed_source}")
        raise InputError(f"{given}: the speed reaches {angle.rpm_max:g} rpm, where order 1 "
                         f"({angle.rpm_max / 60.0:g} Hz) lies above the run's Nyquist frequency "
                         f"{run.rate_hz / 2.0:g} Hz; allowed: speeds below "
                         f"{30.0 * run.rate_hz:g} rpm")
    log = [f"speed from {speed_source}: {angle.rpm_min:.1f}-{angle.rpm_max:.1f} rpm, {angle.revolutions:.1f} rev"]
    if getattr(angle, "timing", None) is not None:
        log.append(f"tacho timing: {angle.timing.describe()}")
        if math.isfinite(angle.timing.angle_uncertainty_rev):
            log.append(f"phase uncertainty at order {top:g}: "
                       f"{360.0 * top * angle.timing.angle_uncertainty_rev:.2g} deg RMS")
    if len(angle.stretches) > 1:
        log.append("speed unknown between the stretches " + ", ".join(
            f"{a:.3f}-{b:.3f} s" for a, b in angle.stretches) + "; each tracked on its own")
    n_total = run.n_samples

    def chunks():
        done = 0
        for piece in run.iter_chunks(vib, chunk):
            done += len(piece)
            yield piece
            if progress is not None:
                progress(min(1.0, done / n_total))

    # Blocks overlap by half (OrderAnalysis default): about 2 x revolutions / rpb of them.
    acc = OrderAnalysis(revs_per_block=rpb, max_order=top, keep_map=True,
                        rpm_bins=_map_bins(angle, 2.0 * angle.revolutions / rpb))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FoldlineWarning)
        for piece in iter_order_track(chunks, run.rate_hz, angle, samples_per_rev=spr, protect=protect):
            acc.feed(piece)
        spectrum = acc.spectrum()
        omap = acc.order_map()
    for w in caught:
        log.append(f"warning: {w.message}")
    log.extend(acc.log)
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
            rfm = rpm_frequency_map(run.iter_chunks(vib, chunk), run.rate_hz, angle, nperseg=nperseg,
                                    rpm_bins=bins)
    mach = _machine_for(run, machine)
    ident = None
    if mach is not None:
        ident = identify_order_map(omap, mach, run.rate_hz)
        log.append(f"identified {len(ident.table)} predicted lines, {len(ident.aliases)} of them aliases")
    doubted = angle.doubted.to_frame() if hasattr(angle.doubted, "to_frame") else pd.DataFrame(
        {"time_s": [], "reason": []}
    )
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
        lines=() if mach is None else tuple(mach.lines()),
        doubted=doubted,
        protect=bool(protect),
        log=tuple(log),
    )
