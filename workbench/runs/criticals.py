"""Run-up results an engineer signs off: order tracks with phase and critical speeds of a run.

:func:`run_criticals` gets the run's speed through :func:`~workbench.runs.analysis.run_speed`
(the one speed path), order-tracks each chosen vibration channel in the angle domain (streamed,
alias-protected), takes the chosen orders' amplitude and phase lag against speed
(:func:`~workbench.angle.order_tracks.order_tracks`), finds the critical speeds
(:func:`~workbench.angle.order_tracks.find_track_criticals`), and computes the frequency
map of the first channel for the Campbell diagram.

The phase is absolute (from a once-per-rev reference) when the speed comes from a tacho with
one pulse per revolution or with missing teeth; otherwise (a regular multi-tooth wheel, a
speed table, a constant speed) it is relative, and the result says so.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field


from workbench.angle import iter_resample_to_angle, frequency_map
from workbench.angle.order_tracks import (DEFAULT_TRACK_ORDERS, DEFAULT_TRACK_REVS_PER_BLOCK,
                                          CriticalSpeed, OrderTrack, RejectedPeak,
                                          find_track_criticals, order_tracks)
from workbench.errors import FoldlineWarning, InputError
from workbench.runs.analysis import (CHUNK_S, SPEED_OPTIONS, _channel_index, _machine_for,
                                     _vibration_channel, run_speed)
from workbench.runs.pipeline import MAX_RF_NPERSEG, _map_bins
from workbench.runs.settings import SettingError, TrackingSettings, usable_max_order
from workbench.runs.files import read_run
from workbench.runs.run import Run

__all__ = ["RunCriticals", "run_criticals", "TRACK_COLUMNS", "SAFETY_NOTE"]

#: Columns of the order-track table (``tracks.csv`` of ``foldline criticals --out``).
TRACK_COLUMNS = ("channel", "order", "rpm", "revs", "amplitude", "phase_deg")

#: The caution every criticals output carries.
SAFETY_NOTE = (
    "Running up through a critical speed is a hazardous test. foldline only analyses "
    "recordings and plans acquisition: follow the machine maker's limits on speed, "
    "acceleration and dwell near criticals, site procedures and local codes, and stop "
    "criteria set by qualified people."
)


@dataclass(frozen=True, eq=False)
class RunCriticals:
    """Order tracks and critical speeds of one run.

    Attributes
    ----------
    source : str
    rate_hz : float
    speed_source : str
        ``"tacho"``, ``"rpm"`` or ``"speed table"``.
    phase_reference : {"absolute", "relative"}
        Whether the phase lags are measured from a once-per-rev reference.
    shaft_angle : ShaftAngle
    tracks : tuple of (str, OrderTrack)
        ``(channel, track)`` for each channel and order.
    criticals : tuple of (str, CriticalSpeed)
    rejected : tuple of (str, RejectedPeak)
    units : dict
        Channel name -> unit.
    operating_rpm : (float, float) or None
    rf_map : FrequencyMap or None
        Of the first channel (for the Campbell diagram).
    machine : Machine or None
    samples_per_rev, revs_per_block : int, float
    """

    source: str
    rate_hz: float
    speed_source: str
    phase_reference: str
    shaft_angle: object
    tracks: tuple
    criticals: tuple
    rejected: tuple
    units: dict
    operating_rpm: tuple | None
    rf_map: object
    machine: object
    samples_per_rev: int
    revs_per_block: float
    log: tuple = field(default_factory=tuple)

    @property
    def channels(self) -> tuple[str, ...]:
        """Channels analysed, in order."""
        return tuple(dict.fromkeys(ch for ch, _ in self.tracks))

    def tracks_of(self, channel: str) -> tuple[OrderTrack, ...]:
        """The order tracks of one channel."""
        return tuple(tr for ch, tr in self.tracks if ch == channel)

    def criticals_of(self, channel: str) -> tuple[CriticalSpeed, ...]:
        """The criticals found on one channel."""
        return tuple(c for ch, c in self.criticals if ch == channel)

    def track_table(self):
        """All tracks as one pandas table (columns :data:`TRACK_COLUMNS`)."""
        import pandas as pd

        frames = [pd.DataFrame({"channel": ch, "order": tr.order, "rpm": tr.rpm, "revs": tr.revs,
                                "amplitude": tr.amplitude, "phase_deg": tr.phase_deg})
                  for ch, tr in self.tracks]
        return pd.concat(frames, ignore_index=True)[list(TRACK_COLUMNS)]

    def criticals_table(self):
        """The criticals as a pandas table, one row each."""
        import pandas as pd

        rows = [{"channel": ch, **c.to_dict()} for ch, c in self.criticals]
        cols = ["channel", "order", "rpm", "amplitude", "amplification_factor",
                "half_power_rpm", "phase_change_deg", "phase_at_peak_deg", "damping_ratio",
                "separation_margin_pct", "required_margin_pct"]
        return pd.DataFrame(rows, columns=cols)

    def to_dict(self) -> dict:
        """The JSON contract of ``foldline criticals``."""
        return {
            "source": self.source,
            "speed_source": self.speed_source,
            "phase_reference": self.phase_reference,
            "operating_rpm": None if self.operating_rpm is None else list(self.operating_rpm),
            "tracks": [{"channel": ch, "order": tr.order, "unit": self.units.get(ch, ""),
                        "phase_reference": tr.phase_reference, "rpm": tr.rpm,
                        "amplitude": tr.amplitude, "phase_deg": tr.phase_deg}
                       for ch, tr in self.tracks],
            "criticals": [{"channel": ch, **c.to_dict()} for ch, c in self.criticals],
            "rejected_peaks": [{"channel": ch, "order": p.order, "rpm": p.rpm,
                                "amplitude": p.amplitude, "reason": p.reason}
                               for ch, p in self.rejected],
            "safety": SAFETY_NOTE,
        }


def _channels(run: Run, channel) -> list[int]:
    """Rows of the chosen vibration channels: one, a list (``"1,3"``) or ``"all"``."""
    if channel is None or isinstance(channel, int):
        return [_vibration_channel(run, channel)]
    if isinstance(channel, (list, tuple)):
        return [_channel_index(run, c, "channel") for c in channel]
    text = str(channel).strip()
    if text == "all":
        rows = [i for i in range(run.n_channels) if i != run.tacho_index]
        if not rows:
            return [_vibration_channel(run, None)]
        return rows
    if "," in text:
        parts = [p.strip() for p in text.split(",") if p.strip()]
        return [_channel_index(run, int(p) if p.isdigit() else p, "channel") for p in parts]
    return [_vibration_channel(run, int(text) if text.isdigit() else text)]


def run_criticals(run_or_path, *, orders=DEFAULT_TRACK_ORDERS, channel=None, operating_rpm=None,
                  machine=None, rate_hz=None, samples_per_rev=64, revs_per_block=None,
                  offset_deg: float = 0.0, protect: bool = True, rf_map: bool = True,
                  **speed_opts) -> RunCriticals:
    """Order tracks with phase and critical speeds of a recorded run.

    Parameters
    ----------
    run_or_path : Run or path-like
    orders : sequence of float
        Orders to track (default 1 and 2).
    channel : int, str, sequence or "all", optional
        Vibration channel(s): 1-based index or name, several (``"1,3"``), or ``"all"``;
        default the first channel that is not the tacho.
    operating_rpm : (float, float), optional
        Operating range for the separation margins (rpm).
    machine : Machine or path-like, optional
        For the Campbell diagram's order lines and resonances; default the sidecar's.
    rate_hz : float, optional
        Sample rate where the file has none.
    samples_per_rev : int
        Angle-domain samples per revolution (default 64: orders up to 25 usable).
    revs_per_block : float, optional
        Revolutions per block of the tracks (default 8).
    offset_deg : float
        Added to every phase lag (degrees).
    protect : bool
        Alias protection of the order tracking.
    rf_map : bool
        Also compute the frequency map of the first channel (the Campbell diagram).
    **speed_opts
        The speed options of :func:`~workbench.runs.analysis.run_speed`
        (:data:`~workbench.runs.analysis.SPEED_OPTIONS`).

    Returns
    -------
    RunCriticals

    References
    ----------
    .. [1] American Petroleum Institute, API Recommended Practice 684, 2nd ed., 2005
       (amplification factor, separation margin; from memory).
    """
    unknown = set(speed_opts) - set(SPEED_OPTIONS)
    if unknown:
        raise InputError(f"unknown option(s) {sorted(unknown)}; allowed speed options: "
                         f"{', '.join(SPEED_OPTIONS)}")
    run = run_or_path if isinstance(run_or_path, Run) else read_run(run_or_path, rate_hz=rate_hz)
    source = str(run.source or "<memory>")
    # the settings check their own fields (named; the command names its options)
    rpb = DEFAULT_TRACK_REVS_PER_BLOCK if revs_per_block is None else revs_per_block
    checked = TrackingSettings(samples_per_rev=samples_per_rev, revs_per_block=rpb)
    spr, rpb = checked.samples_per_rev, checked.revs_per_block
    orders = tuple(float(o) for o in orders)
    if max(orders) >= usable_max_order(spr):
        raise SettingError("orders", orders, f"order {max(orders):g} is beyond the usable "
                           f"{usable_max_order(spr):g} at {spr} samples/rev; raise "
                           "samples_per_rev")
    rows = _channels(run, channel)
    angle, speed_source = run_speed(run, **speed_opts)
    ppr = speed_opts.get("pulses_per_rev") or run.pulses_per_rev
    miss = speed_opts.get("missing_pulses")
    miss = run.missing_pulses if miss is None else miss
    once = speed_source == "tacho" and (int(ppr) == 1 or int(miss) > 0)
    if operating_rpm is not None:
        from workbench.angle.order_tracks import _operating

        operating_rpm = _operating(operating_rpm)
    chunk = max(4096, int(CHUNK_S * run.rate_hz))
    tracks, crits, rejected, units, log = [], [], [], {}, []
    for row in rows:
        name = run.channels[row].name
        units[name] = run.channels[row].unit
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", FoldlineWarning)
            pieces = iter_resample_to_angle(lambda name=name: run.iter_chunks(name, chunk),
                                      run.rate_hz, angle, samples_per_rev=spr, protect=protect)
            trs = order_tracks(pieces, orders, once_per_rev=once, offset_deg=offset_deg,
                               revs_per_block=rpb)
        log.extend(f"{name}: warning: {w.message}" for w in caught)
        res = find_track_criticals(trs, operating_rpm=operating_rpm)
        tracks.extend((name, tr) for tr in trs)
        crits.extend((name, c) for c in res.criticals)
        rejected.extend((name, p) for p in res.rejected)
    rfm = None
    if rf_map:
        first = run.channels[rows[0]].name
        nperseg = min(MAX_RF_NPERSEG, 1 << max(8, int(round(math.log2(max(run.rate_hz * 0.5,
                                                                            256.0))))))
        if run.n_samples >= 2 * nperseg:
            rfm = frequency_map(run.iter_chunks(first, chunk), run.rate_hz, angle,
                                    nperseg=nperseg,
                                    rpm_bins=_map_bins(angle, 2.0 * run.n_samples / nperseg))
    mach = _machine_for(run, machine)
    if not once:
        log.append("phase is relative: no once-per-rev reference (a 1-pulse-per-rev tacho or a "
                   "wheel with missing teeth)")
    return RunCriticals(source, float(run.rate_hz), speed_source,
                        "absolute" if once else "relative", angle, tuple(tracks), tuple(crits),
                        tuple(rejected), units, operating_rpm, rfm, mach, int(spr), rpb,
                        tuple(log))
