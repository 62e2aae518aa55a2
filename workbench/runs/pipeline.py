"""The analysis of a run as stages, each kept, so that a changed setting redoes only what it
affects.

Stages, in order (:data:`STAGES`):

1. ``"speed"`` -- the reference shaft's angle against time (tacho pulses, a known speed, an
   order's ridge in the vibration or a speed channel): :class:`SpeedStage`;
2. ``"angle"`` -- computed order tracking of the channels, alias protected, in one pass over
   the record: :class:`AngleStage`;
3. ``"spectra"`` -- order spectrum and its peaks, order map, envelope order spectrum,
   frequency map and overall level of each channel: :class:`SpectraStage`;
4. ``"cuts"`` -- order cuts at the asked (or default) orders: :class:`CutsStage`;
5. ``"identify"`` -- measured ridges matched with the machine's predicted lines, the lines
   no prediction explains, the valid region and the lines inside each cut's band:
   :class:`IdentifyStage`.

:class:`TrackingPipeline` holds a run, a :class:`~workbench.runs.settings.TrackingSettings`
and the result of each stage.  :meth:`TrackingPipeline.update` takes changed settings
(``dataclasses.replace`` on the settings) and drops the results from the first stage a
changed field affects (:data:`FIRST_STAGE`); the next request redoes only those.

The angle-domain signal is kept only when asked (``keep_signal=True``, as the notebook panel
does): a long record's tracked signal can be large, so by default the spectra are fed while
the record streams and a change of a spectra setting (block length, window, ...) redoes the
tracking pass.
"""

from __future__ import annotations

import math
import warnings
from collections import Counter
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from workbench.angle import (AngleSignal, OrderAnalysis, envelope_order_spectrum, find_order_peaks,
                             frequency_map, order_cut)
from workbench.angle.tracking import iter_resample_to_angle_channels, resolve_threads
from workbench.errors import FoldlineWarning, InputError
from workbench.runs.run import Run, log_entry
from workbench.runs.settings import SPEED_FIELDS, SettingError, TrackingSettings

__all__ = ["TrackingPipeline", "STAGES", "FIRST_STAGE", "SpeedStage", "AngleStage",
           "SpectraStage", "CutsStage", "IdentifyStage", "first_stage"]

#: The stages, in the order they run.
STAGES = ("speed", "angle", "spectra", "cuts", "identify")

#: First stage each setting affects (None: no result depends on it).  For a tacho speed
#: without a ``speed_tolerance`` of its own, the settings that move the default tolerance
#: (``samples_per_rev``, ``max_order``, ``revs_per_block``) reach the speed stage too, see
#: :func:`first_stage`.
FIRST_STAGE = {
    **{name: "speed" for name in SPEED_FIELDS},
    "samples_per_rev": "angle",
    "protect": "angle",
    "threads": None,
    "revs_per_block": "spectra",
    "max_order": "spectra",
    "window": "spectra",
    "envelope_hz": "spectra",
    "overall_band_hz": "spectra",
    "integrate": "spectra",
    "integrate_from_hz": "spectra",
    "rf_map": "spectra",
    "cut_orders": "cuts",
    "cut_bandwidth_orders": "cuts",
    "aa_filter": "identify",
}

#: Most rows an order map or frequency map keeps; longer records are averaged (on power)
#: into this many rpm bins while they stream, so a map's memory does not grow with the record.
MAX_MAP_ROWS = 800
#: Longest time block of the frequency map, samples (frequency bins = half of it).
MAX_RF_NPERSEG = 8192
#: Seconds of the record read per chunk while streaming.
CHUNK_S = 8.0


def _tacho_speed(settings: TrackingSettings) -> bool:
    return all(getattr(settings, k) is None for k in ("rpm", "speed_table", "speed_order",
                                                       "speed_channel"))


def first_stage(old: TrackingSettings, new: TrackingSettings) -> str | None:
    """The first stage whose result changes from ``old`` to ``new`` (None: none does)."""
    changed = new.changed(old)
    found = [STAGES.index(FIRST_STAGE[f]) for f in changed if FIRST_STAGE.get(f)]
    if _tacho_speed(new) and _tacho_speed(old) and old.tacho_tolerance != new.tacho_tolerance:
        found.append(0)
    return STAGES[min(found)] if found else None


@dataclass(frozen=True, eq=False)
class SpeedStage:
    """The speed: ``angle`` (ShaftAngle), ``source`` (``"tacho"``, ``"rpm"``, ``"speed
    table"``, ``"vibration"`` or ``"channel"``), ``estimate`` (SpeedEstimate for the vibration
    or a channel), ``pulses`` (the tacho's pulse times, s, or None) and log entries."""

    angle: object
    source: str
    estimate: object = None
    pulses: object = None
    log: tuple = ()


@dataclass(frozen=True, eq=False)
class AngleStage:
    """The channels tracked in the angle domain: ``channels`` (names), ``units``, ``pieces``
    (per channel, the tracked pieces in order, when the signal is kept), ``streamed`` (per
    channel, the spectra fed while streaming, when it is not) and log entries per channel."""

    channels: tuple
    units: tuple
    pieces: tuple | None = None
    streamed: tuple | None = None
    log: tuple = ()

    def signal(self, channel) -> AngleSignal:
        """One channel's tracked signal (kept signals only)."""
        if self.pieces is None:
            raise InputError("the angle-domain signal was not kept; make the pipeline with "
                             "keep_signal=True")
        parts = self.pieces[self.channels.index(channel)]
        return AngleSignal.concatenate(parts, parts[-1].log if parts else ())


@dataclass(frozen=True, eq=False)
class SpectraStage:
    """Per channel (tuples in the order of ``AngleStage.channels``): order ``spectrum``,
    ``peaks`` (DataFrame), ``order_map``, ``envelope`` and ``envelope_peaks``, ``rf_map``,
    ``overall``; ``top_order`` and log entries per channel."""

    spectrum: tuple
    peaks: tuple
    order_map: tuple
    envelope: tuple
    envelope_peaks: tuple
    rf_map: tuple
    overall: tuple
    top_order: float
    log: tuple = ()


@dataclass(frozen=True, eq=False)
class CutsStage:
    """Order cuts per channel; ``orders`` are the orders asked (after the default rule)."""

    orders: tuple
    cuts: tuple
    log: tuple = ()


@dataclass(frozen=True, eq=False)
class IdentifyStage:
    """Per channel: ``identification`` (or None without a machine), ``unmatched`` ridges,
    ``cut_band_lines``; the ``valid`` region and the machine's ``lines``."""

    identification: tuple
    unmatched: tuple
    cut_band_lines: tuple
    valid: object
    lines: tuple = ()
    log: tuple = ()


def _peaks_frame(peaks) -> pd.DataFrame:
    return pd.DataFrame(
        {"order": np.asarray(peaks.order), "amplitude": np.asarray(peaks.amplitude),
         "prominence_db": np.asarray(peaks.prominence_db)}
    )


def _map_bins(angle, n_blocks: float):
    """rpm bin edges for a streamed map when a record has more blocks than MAX_MAP_ROWS."""
    if n_blocks <= MAX_MAP_ROWS:
        return None
    lo, hi = float(angle.rpm_min), float(angle.rpm_max)
    return np.linspace(lo, max(hi, lo * (1 + 1e-9) + 1e-9), MAX_MAP_ROWS + 1)


def _note(action, text, **params):
    return log_entry(action, note=text, **params)


class TrackingPipeline:
    """A run analysed in stages, each result kept until a setting it depends on changes.

    Parameters
    ----------
    run : Run or path-like
        The run, or its file (read with :func:`~workbench.runs.files.read_run`).
    settings : TrackingSettings, optional
        Default ``TrackingSettings()``.
    machine : Machine or path-like, optional
        For the identification and the default cut orders; default the sidecar's machine file.
    plan : Plan, optional
        For the default cut orders (the lines its bands follow).
    channels : None, "all", or sequence of int / str
        Vibration channels (see :func:`~workbench.runs.analysis.vibration_channels`).
    rate_hz : float, optional
        Sample rate where the file does not give it.
    keep_signal : bool
        Keep the tracked signals, so that a spectra setting does not redo the tracking.
    progress : callable, optional
        Called with the fraction of the record tracked (0..1).

    Attributes
    ----------
    runs : collections.Counter
        How many times each stage ran.
    """

    def __init__(self, run, settings: TrackingSettings | None = None, *, machine=None, plan=None,
                 channels=None, rate_hz=None, keep_signal: bool = False, progress=None):
        from workbench.runs.analysis import _machine_for
        from workbench.runs.files import read_run

        self.run = run if isinstance(run, Run) else read_run(run, rate_hz=rate_hz)
        self.settings = TrackingSettings() if settings is None else settings
        if not isinstance(self.settings, TrackingSettings):
            raise InputError(f"settings of type {type(self.settings).__name__}: give a "
                             "TrackingSettings")
        self.machine = _machine_for(self.run, machine)
        self.plan = plan
        self.keep_signal = bool(keep_signal)
        self.progress = progress
        self.runs = Counter()
        self._results = {}
        self._pulses = {}
        self._channels_asked = channels
        self.rows = self._rows()

    # -- settings -------------------------------------------------------------------------
    def _rows(self):
        from workbench.runs.analysis import vibration_channels

        return vibration_channels(self.run, self._channels_asked, tacho=self.settings.tacho,
                                  speed_channel=self.settings.speed_channel)

    @property
    def channel_names(self) -> tuple:
        """Names of the channels analysed, in order."""
        return tuple(self.run.channels[i].name for i in self.rows)

    def update(self, settings: TrackingSettings | None = None, **changes) -> str | None:
        """New settings (or ``changes`` of fields); returns the first stage dropped, or None.

        The results of that stage and every later one are dropped; the earlier ones are kept.
        """
        new = self.settings if settings is None else settings
        if changes:
            new = replace(new, **changes)
        stage = first_stage(self.settings, new)
        self.settings = new
        if stage is not None:
            self._drop(stage)
        return stage

    def set_channels(self, channels) -> str | None:
        """Analyse other channels; the speed is kept (unless it was found in a channel)."""
        self._channels_asked = channels
        rows = self._rows()
        if rows == self.rows:
            return None
        self.rows = rows
        stage = "speed" if self.settings.speed_order is not None else "angle"
        self._drop(stage)
        return stage

    def _drop(self, stage: str) -> None:
        angle = self._results.get("angle")
        if stage == "spectra" and angle is not None and angle.pieces is None:
            stage = "angle"   # the signal was not kept: the spectra are made while tracking
        for s in STAGES[STAGES.index(stage):]:
            self._results.pop(s, None)

    def result(self, stage: str):
        """The result of ``stage``, computed (with the stages before it) when missing."""
        if stage not in STAGES:
            raise InputError(f"stage {stage!r}: allowed: {', '.join(STAGES)}")
        if stage not in self._results:
            make = getattr(self, f"_make_{stage}")
            if stage in ("angle", "spectra"):
                # the tracker's and the spectra's warnings go into each channel's log
                with warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always", FoldlineWarning)
                    out = make()
                extra = tuple(_note(stage, f"warning: {w.message}") for w in caught)
                if extra:
                    out = replace(out, log=tuple(tuple(lg) + extra for lg in out.log))
            else:
                out = make()
            self._results[stage] = out
            self.runs[stage] += 1
        return self._results[stage]

    def speed(self) -> SpeedStage:
        return self.result("speed")

    def angle(self) -> AngleStage:
        return self.result("angle")

    def spectra(self) -> SpectraStage:
        return self.result("spectra")

    def cuts(self) -> CutsStage:
        return self.result("cuts")

    def identify(self) -> IdentifyStage:
        return self.result("identify")

    # -- stages ---------------------------------------------------------------------------
    @property
    def _chunk(self) -> int:
        return max(4096, int(CHUNK_S * self.run.rate_hz))

    def _make_speed(self) -> SpeedStage:
        from workbench.runs.analysis import _speed, run_speed_estimate, tacho_fit, tacho_pulses

        run, st = self.run, self.settings
        opts = st.speed_options
        top = st.top_order
        estimate = run_speed_estimate(run, chunk=self._chunk, channel=self.channel_names[0],
                                      **{k: v for k, v in opts.items() if k != "speed_tolerance"})
        pulses = None
        if estimate is not None:
            angle, source = estimate.angle, estimate.source
        elif _tacho_speed(st):
            key = st.tacho
            if key not in self._pulses:
                self._pulses = {key: tacho_pulses(run, st.tacho, self._chunk)}
            pulses, name = self._pulses[key]
            angle = tacho_fit(run, pulses, name, pulses_per_rev=st.pulses_per_rev,
                              missing_pulses=st.missing_pulses,
                              speed_tolerance=st.tacho_tolerance)
            source = "tacho"
        else:
            angle, source = _speed(run, chunk=self._chunk, **{
                k: opts.get(k) for k in ("tacho", "pulses_per_rev", "missing_pulses", "rpm",
                                         "speed_table")})
        if not angle.rpm_max / 60.0 < run.rate_hz / 2.0:  # even order 1 would lie above Nyquist
            why = (f"the speed reaches {angle.rpm_max:g} rpm, where order 1 "
                   f"({angle.rpm_max / 60.0:g} Hz) lies above the run's Nyquist frequency "
                   f"{run.rate_hz / 2.0:g} Hz; allowed: speeds below {30.0 * run.rate_hz:g} rpm")
            given = {"rpm": "rpm", "speed table": "speed_table"}.get(source)
            if given is not None:
                raise SettingError(given, getattr(st, given), why)
            raise InputError(f"{run.source or '<memory>'}: {source}: {why}")
        log = [_note("speed", f"speed from {source}: {angle.rpm_min:.1f}-{angle.rpm_max:.1f} rpm, "
                              f"{angle.revolutions:.1f} rev", source=source)]
        if getattr(angle, "timing", None) is not None:
            log.append(_note("speed", f"tacho timing: {angle.timing.describe()}"))
            if math.isfinite(angle.timing.angle_uncertainty_rev):
                log.append(_note("speed", f"phase uncertainty at order {top:g}: "
                                          f"{360.0 * top * angle.timing.angle_uncertainty_rev:.2g}"
                                          " deg RMS"))
        if len(angle.stretches) > 1:
            log.append(_note("speed", "speed unknown between the stretches " + ", ".join(
                f"{a:.3f}-{b:.3f} s" for a, b in angle.stretches) + "; each tracked on its own"))
        if estimate is not None:
            log.append(_note("speed", f"speed: {estimate.method}; uncertainty "
                                      f"{100 * estimate.speed_uncertainty:.3g} % RMS"))
        return SpeedStage(angle, source, estimate, pulses, tuple(log))

    def _accumulators(self, angle):
        st = self.settings
        return [OrderAnalysis(revs_per_block=st.revs_per_block, max_order=st.top_order,
                              window=st.window, keep_map=True,
                              rpm_bins=_map_bins(angle, 2.0 * angle.revolutions / st.revs_per_block))
                for _ in self.rows]

    def _make_angle(self) -> AngleStage:
        run, st = self.run, self.settings
        angle = self.speed().angle
        names = self.channel_names
        threads = resolve_threads(st.threads, "threads")
        n_total = run.n_samples
        progress = self.progress

        def chunks():
            done = 0
            # Single precision: the tracker filters in single precision (rounding -140 dB).
            for piece in run.iter_chunks_many(names, self._chunk, dtype=np.float32):
                done += piece.shape[-1]
                yield piece
                if progress is not None:
                    progress(min(1.0, done / n_total))

        accs = None if self.keep_signal else self._accumulators(angle)
        kept = [[] for _ in names]
        pool = None
        if accs is not None and threads > 1 and len(accs) > 1:
            from concurrent.futures import ThreadPoolExecutor

            pool = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="foldline-spectra")
        try:
            for pieces in iter_resample_to_angle_channels(chunks, run.rate_hz, angle,
                                                          samples_per_rev=st.samples_per_rev,
                                                          protect=st.protect, threads=threads):
                if accs is None:
                    for k, piece in zip(kept, pieces):
                        k.append(piece)
                elif pool is None:
                    for acc, piece in zip(accs, pieces):
                        acc.feed(piece)
                else:
                    for f in [pool.submit(acc.feed, piece) for acc, piece in zip(accs, pieces)]:
                        f.result()
        finally:
            if pool is not None:
                pool.shutdown(wait=True)
        units = tuple(run.channels[i].unit for i in self.rows)
        note = _note("angle", f"tracked {len(names)} channel(s) at {st.samples_per_rev} samples/rev, "
                              f"alias protection {'on' if st.protect else 'off'}",
                     samples_per_rev=st.samples_per_rev, threads=threads)
        if accs is None:
            return AngleStage(names, units, pieces=tuple(tuple(k) for k in kept),
                              log=tuple((note,) for _ in names))
        streamed = tuple((acc.spectrum(), acc.order_map(), tuple(acc.log)) for acc in accs)
        return AngleStage(names, units, streamed=streamed, log=tuple((note,) for _ in names))

    def _make_spectra(self) -> SpectraStage:
        run, st = self.run, self.settings
        angle = self.speed().angle
        stage = self.angle()
        if stage.streamed is not None:
            done = stage.streamed
        else:
            done = []
            for parts in stage.pieces:
                acc = self._accumulators(angle)[0]
                for piece in parts:
                    acc.feed(piece)
                done.append((acc.spectrum(), acc.order_map(), tuple(acc.log)))
        if st.envelope_hz is not None and not st.envelope_hz[1] < run.rate_hz / 2:
            raise SettingError("envelope_hz", st.envelope_hz, "the band must satisfy 0 < lo < hi "
                               f"< Nyquist ({run.rate_hz / 2:g} Hz)")
        if st.overall_band_hz is not None and not st.overall_band_hz[1] <= run.rate_hz / 2:
            raise SettingError("overall_band_hz", st.overall_band_hz, "the band must satisfy 0 <= "
                               f"LO < HI <= Nyquist ({run.rate_hz / 2:g} Hz)")
        out = {k: [] for k in ("spectrum", "peaks", "order_map", "envelope", "envelope_peaks",
                               "rf_map", "overall", "log")}
        for name, unit, (spectrum, omap, acc_log) in zip(stage.channels, stage.units, done):
            log = [_note("spectra", line) for line in acc_log]
            out["spectrum"].append(spectrum)
            out["order_map"].append(omap)
            out["peaks"].append(_peaks_frame(find_order_peaks(spectrum, n=10)))
            env, env_peaks = None, pd.DataFrame({"order": [], "amplitude": [], "prominence_db": []})
            if st.envelope_hz is not None:
                x = np.asarray(run.channel(name), dtype=float)
                env = envelope_order_spectrum(x, run.rate_hz, angle, band_hz=st.envelope_hz,
                                              revs_per_block=st.revs_per_block)
                del x
                env_peaks = _peaks_frame(find_order_peaks(env, n=10))
                log.append(_note("spectra", f"envelope order spectrum, band "
                                            f"{st.envelope_hz[0]:g}-{st.envelope_hz[1]:g} Hz"))
            out["envelope"].append(env)
            out["envelope_peaks"].append(env_peaks)
            rfm = None
            if st.rf_map:
                nperseg = min(MAX_RF_NPERSEG, 1 << max(8, int(round(math.log2(max(run.rate_hz * 0.5,
                                                                                 256.0))))))
                if run.n_samples >= 2 * nperseg:
                    bins = _map_bins(angle, 2.0 * run.n_samples / nperseg)
                    rfm = frequency_map(run.iter_chunks(name, self._chunk), run.rate_hz, angle,
                                        nperseg=nperseg, rpm_bins=bins)
            out["rf_map"].append(rfm)
            out["overall"].append(self._overall(name, unit, angle, omap, log))
            out["log"].append(tuple(log))
        return SpectraStage(**{k: tuple(v) for k, v in out.items()}, top_order=st.top_order)

    def _overall(self, name, unit, angle, omap, log):
        """Overall RMS in the order map's rpm rows; blocks short enough that each row gets one."""
        from workbench.angle.overall import default_block_samples, overall_level

        run, st = self.run, self.settings
        # rows of the map are half a block (rpb / 2 revolutions) apart; at the top speed that is
        row_s = 0.5 * st.revs_per_block * 60.0 / max(float(angle.rpm_max), 1e-9)
        n = 1 << max(8, int(math.floor(math.log2(max(run.rate_hz * row_s, 256.0)))))
        n = min(n, default_block_samples(run.rate_hz))
        weight, shown = None, None
        if st.integrate is not None:
            from workbench.angle.scaling import integration_weight

            # the weight changes across a line's window lobe (+-2 bins): bins of at most half
            # the lowest frequency integrated keep that error small (measured on a sinusoid
            # from 2 Hz: +0.5 % at 10 Hz, +0.02 % at 50 Hz), at the cost of coarser speed rows
            n = max(n, 1 << int(math.ceil(math.log2(2.0 * run.rate_hz / st.integrate_from_hz))))

            weight, shown = integration_weight(st.integrate, unit, st.integrate_from_hz)
            log.append(_note("spectra", f"overall level integrated to {st.integrate} ({shown}) "
                                        f"from {st.integrate_from_hz:g} Hz"))
        if run.n_samples < n:
            return None
        return overall_level(run.iter_chunks(name, self._chunk), run.rate_hz, angle,
                             rpm_rows=omap.rpm, band_hz=st.overall_band_hz, block_samples=n,
                             weight=weight, unit=shown)

    def _make_cuts(self) -> CutsStage:
        st = self.settings
        sp = self.spectra()
        orders = st.cut_orders_for(machine=self.machine, plan=self.plan, peaks=sp.peaks[0])
        per = []
        for spectrum, omap in zip(sp.spectrum, sp.order_map):
            cuts = []
            for o in orders:
                half = 0.5 * (st.cut_bandwidth_orders or 4.0 / spectrum.revs_per_block)
                if o + half <= omap.order[-1]:
                    cuts.append(order_cut(omap, o, bandwidth_orders=st.cut_bandwidth_orders))
            per.append(tuple(cuts))
        note = _note("cuts", "order cuts at " + ", ".join(f"{o:g}" for o in orders),
                     orders=list(orders))
        return CutsStage(tuple(orders), tuple(per), (note,))

    def _make_identify(self) -> IdentifyStage:
        from workbench.angle.matching import identify_order_map, unmatched_ridges
        from workbench.angle.validity import valid_region
        from workbench.runs.analysis import _cut_band_lines

        run, st = self.run, self.settings
        sp, cuts = self.spectra(), self.cuts()
        mach = self.machine
        lines = () if mach is None else tuple(mach.lines())
        idents, unmatched, shared, logs = [], [], [], []
        for omap, ch_cuts in zip(sp.order_map, cuts.cuts):
            log = []
            if mach is not None:
                ident = identify_order_map(omap, mach, run.rate_hz, samples_per_rev=st.samples_per_rev)
                log.append(_note("identify", f"identified {len(ident.table)} predicted lines, "
                                             f"{len(ident.aliases)} of them aliases"))
                um = ident.unmatched
            else:
                ident, um = None, unmatched_ridges(omap, samples_per_rev=st.samples_per_rev)
            texts = []
            found = _cut_band_lines(ch_cuts, mach, run.rate_hz, texts)
            log.extend(_note("identify", t) for t in texts)
            idents.append(ident)
            unmatched.append(um)
            shared.append(found)
            logs.append(tuple(log))
        return IdentifyStage(tuple(idents), tuple(unmatched), tuple(shared),
                             valid_region(run.rate_hz, st.aa_filter), lines, tuple(logs))

    # -- the whole analysis ---------------------------------------------------------------
    def analysis(self):
        """Every stage's result as a :class:`~workbench.runs.analysis.MultiRunAnalysis` (one
        :class:`~workbench.runs.analysis.RunAnalysis` per channel)."""
        from workbench.runs.analysis import MultiRunAnalysis, RunAnalysis

        run, st = self.run, self.settings
        sp_, an, spec, cuts, ident = (self.speed(), self.angle(), self.spectra(), self.cuts(),
                                      self.identify())
        angle = sp_.angle
        doubted = angle.doubted.to_frame() if hasattr(angle.doubted, "to_frame") else pd.DataFrame(
            {"time_s": [], "reason": []})
        out = []
        for i, name in enumerate(an.channels):
            log = (tuple(run.log) + sp_.log + an.log[i] + spec.log[i] + cuts.log
                   + ident.log[i])
            out.append(RunAnalysis(
                source=str(run.source or "<memory>"), rate_hz=float(run.rate_hz), channel=name,
                unit=an.units[i], shaft_angle=angle, speed_source=sp_.source,
                samples_per_rev=st.samples_per_rev,
                revs_per_block=float(spec.spectrum[i].revs_per_block),
                duration_s=float(run.duration_s), spectrum=spec.spectrum[i], peaks=spec.peaks[i],
                envelope=spec.envelope[i], envelope_peaks=spec.envelope_peaks[i],
                envelope_hz=st.envelope_hz, order_map=spec.order_map[i], cuts=cuts.cuts[i],
                rf_map=spec.rf_map[i], identification=ident.identification[i],
                lines=ident.lines, doubted=doubted, protect=st.protect, log=log,
                speed_estimate=sp_.estimate, unmatched=ident.unmatched[i],
                overall=spec.overall[i], valid=ident.valid, cut_band_lines=ident.cut_band_lines[i],
                settings=replace(st, cut_orders=cuts.orders), max_order=spec.top_order))
        return MultiRunAnalysis(tuple(out), threads=resolve_threads(st.threads, "threads"))
