"""Angle layer: tacho processing, computed order tracking and order analysis.

Numpy arrays in, frozen dataclasses out; never imports the run layer.

Typical flow::

    pulses = detect_pulses(tacho, rate_hz)
    angle = tacho_angle(pulses, pulses_per_rev=60, missing_pulses=2)
    sig = resample_to_angle(x, rate_hz, angle, samples_per_rev=256)
    spec = order_spectrum(sig, revs_per_block=32)

For records larger than memory, feed chunks to :func:`detect_pulses` and stream the tracked
signal into :func:`order_map` with :func:`iter_resample_to_angle`.
"""

from workbench.angle.spectra import (OrderAnalysis, OrderCut, OrderMap, OrderPeaks,
                                     OrderSpectrum, FrequencyMap, WindowGains,
                                     envelope_order_spectrum, find_order_peaks, order_cut,
                                     order_map, order_spectrum, frequency_map, window_gains)
from workbench.angle.pulse_angles import tacho_angle
from workbench.angle.pulse_timing import DEFAULT_SPEED_TOLERANCE, PulseTiming, speed_tolerance_for
from workbench.angle.pulses import PulseDetector, detect_pulses
from workbench.angle.shaft_angle import FIT_METHODS, DoubtedPulses, ShaftAngle
from workbench.angle.tracking import AngleSignal, OrderTracker, iter_resample_to_angle, resample_to_angle
from workbench._lazy import lazy_names

# Order extraction, the speed from the vibration and order tracks with phase are imported on
# first use (PEP 562): they need scipy.signal and scipy.ndimage, which the tracking path does
# not.
_LAZY = {
    "workbench.angle.vold_kalman": ("OrderExtraction", "extract_orders", "vk_bandwidth_hz",
                                    "vk_response", "vk_weighting"),
    "workbench.angle.vibration_speed": ("SpeedEstimate", "speed_from_channel",
                                        "speed_from_vibration"),
    "workbench.angle.order_tracks": ("CriticalSearch", "CriticalSpeed", "OrderTrack",
                                     "RejectedPeak", "find_criticals", "find_track_criticals",
                                     "order_tracks"),
}
__getattr__, __dir__ = lazy_names(__name__, _LAZY, globals())


__all__ = [
    "PulseDetector", "detect_pulses", "DoubtedPulses", "PulseTiming", "ShaftAngle", "tacho_angle",
    "FIT_METHODS", "speed_tolerance_for", "DEFAULT_SPEED_TOLERANCE",
    "AngleSignal", "OrderTracker", "resample_to_angle", "iter_resample_to_angle",
    "OrderAnalysis", "OrderSpectrum", "OrderMap", "OrderCut", "FrequencyMap", "OrderPeaks",
    "WindowGains", "window_gains", "order_spectrum", "order_map", "order_cut",
    "envelope_order_spectrum", "frequency_map", "find_order_peaks",
    "OrderExtraction", "extract_orders", "vk_weighting", "vk_bandwidth_hz", "vk_response",
    "SpeedEstimate", "speed_from_vibration", "speed_from_channel",
    "CriticalSearch", "CriticalSpeed", "OrderTrack", "RejectedPeak", "find_criticals",
    "find_track_criticals", "order_tracks",
]
