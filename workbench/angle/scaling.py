"""Amplitude scaling of order results: peak or RMS, dB against a reference, and integration of
acceleration to velocity or displacement.

The angle layer computes peak amplitudes in the channel's unit.  Analysts read levels in other
ways: RMS (peak / sqrt 2 for a sinusoid), dB against a reference, and for acceleration
channels as velocity (mm/s, the unit of the usual severity charts) or displacement (um).
Every order result can be converted with the functions here; the conversion is exact for each
sinusoidal component:

* integration: a component of frequency ``f`` and acceleration amplitude ``A`` has velocity
  amplitude ``A / (2 pi f)`` and displacement amplitude ``A / (2 pi f)^2``.  In an order map
  ``f = order x rpm / 60`` for each bin of each row; below ``min_hz`` the division blows up
  noise and DC drift, so those bins are set to NaN (a high-pass at ``min_hz``, documented
  with every result that uses it);
* RMS: ``A / sqrt 2``;
* dB: ``20 log10(A / ref)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from workbench import checks
from workbench.errors import InputError

__all__ = ["AmplitudeScaling", "INTEGRATIONS", "AMPLITUDES", "acceleration_factor",
           "integrate_order_map", "integrate_frequency_map", "spectrum_from_map", "DEFAULT_MIN_HZ",
           "G_N", "correct_rolloff_map", "integration_weight"]

#: What an acceleration channel can be integrated to.
INTEGRATIONS = ("velocity", "displacement")
#: Amplitude conventions.
AMPLITUDES = ("peak", "rms")
#: Lowest frequency integrated, Hz (below it bins are NaN): common practice for machinery
#: velocity is 2 Hz or 10 Hz (ISO 10816 / 20816 broadband velocity: 10 Hz to 1 kHz, or 2 Hz
#: for slow machines); 2 Hz keeps slow shafts.
DEFAULT_MIN_HZ = 2.0
#: Standard gravity, m/s^2 (CGPM 1901), for channels in g.
G_N = 9.80665

# channel unit -> factor to m/s^2
_ACCEL_UNITS = {"m/s^2": 1.0, "m/s2": 1.0, "m/s\u00b2": 1.0, "m s^-2": 1.0, "ms^-2": 1.0,
                "mm/s^2": 1e-3, "mm/s2": 1e-3, "g": G_N, "gn": G_N}
# result -> (unit, factor from SI)
_OUT_UNITS = {"velocity": ("mm/s", 1e3), "displacement": ("um", 1e6)}


def acceleration_factor(unit: str) -> float:
    """Factor from the channel's unit to m/s^2; InputError when the unit is not an acceleration."""
    key = str(unit or "").strip().lower().replace(" ", "")
    if key not in _ACCEL_UNITS:
        raise InputError(f"channel unit {unit!r}: --integrate needs an acceleration channel; allowed units: "
                         + ", ".join(sorted({'m/s^2', 'mm/s^2', 'g'}))
                         + " (set the channel's unit in the run's sidecar)")
    return _ACCEL_UNITS[key]


@dataclass(frozen=True)
class AmplitudeScaling:
    """How amplitudes are shown.

    Attributes
    ----------
    amplitude : {"peak", "rms"}
    db_ref : float or None
        Reference of the dB scale, in the shown unit (None: linear).
    integrate : {None, "velocity", "displacement"}
    min_hz : float
        Lowest frequency integrated, Hz.
    """

    amplitude: str = "peak"
    db_ref: float | None = None
    integrate: str | None = None
    min_hz: float = DEFAULT_MIN_HZ

    def __post_init__(self):
        # Named by the fields; the command turns them into its options.
        checks.choice(None, "amplitude", self.amplitude, AMPLITUDES)
        if self.integrate is not None:
            checks.choice(None, "integrate", self.integrate, INTEGRATIONS)
        if self.db_ref is not None:
            checks.positive(None, "db_ref", self.db_ref, unit="the reference, in the shown unit")
        checks.positive(None, "min_hz", self.min_hz, unit="Hz")

    @property
    def is_identity(self) -> bool:
        """True when nothing changes (peak, linear, not integrated)."""
        return self.amplitude == "peak" and self.db_ref is None and self.integrate is None

    def unit(self, channel_unit: str) -> str:
        """Unit of the shown amplitudes (before dB)."""
        return _OUT_UNITS[self.integrate][0] if self.integrate else (channel_unit or "")

    def label(self, channel_unit: str, what: str = "amplitude") -> str:
        """Axis label: e.g. ``"velocity, RMS (mm/s)"`` or ``"amplitude, peak (dB re 1 m/s^2)"``."""
        unit = self.unit(channel_unit)
        head = f"{self.integrate or what}, {'RMS' if self.amplitude == 'rms' else 'peak'}"
        if self.db_ref is not None:
            return f"{head} (dB re {self.db_ref:g} {unit})".replace("  ", " ")
        return f"{head}{(' (' + unit + ')') if unit else ''}"

    def level(self, amplitude):
        """Peak amplitudes (already integrated) -> shown values (RMS and / or dB)."""
        a = np.asarray(amplitude, dtype=float)
        if self.amplitude == "rms":
            a = a / math.sqrt(2.0)
        if self.db_ref is not None:
            with np.errstate(divide="ignore", invalid="ignore"):
                a = 20.0 * np.log10(np.maximum(a, 1e-300) / self.db_ref)
        return a

    def to_dict(self, channel_unit: str) -> dict:
        """JSON form of the scaling."""
        return {"amplitude": self.amplitude, "db_ref": self.db_ref, "integrate": self.integrate,
                "integrate_from_hz": self.min_hz if self.integrate else None,
                "unit": self.unit(channel_unit), "label": self.label(channel_unit)}


def _divisor(hz, power, min_hz):
    w = 2.0 * np.pi * np.asarray(hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(np.asarray(hz) >= min_hz, w ** power, np.nan)


def integration_weight(to="velocity", unit="m/s^2", min_hz=DEFAULT_MIN_HZ):
    """The integration as an amplitude weight of frequency: ``f -> k / (2 pi f)^p``.

    ``p`` is 1 for velocity (mm/s) and 2 for displacement (um); ``k`` converts the channel's
    acceleration unit to the shown unit.  Below ``min_hz`` the weight is 0 (the high-pass the
    integrated order results apply as NaN bins).  Used for the overall level
    (:func:`~workbench.angle.overall.overall_level`, ``weight=``).

    Returns
    -------
    (callable, str)
        The weight and the unit of the integrated level.
    """
    if to not in INTEGRATIONS:
        raise InputError(f"integrate {to!r}: allowed: " + ", ".join(INTEGRATIONS))
    p = 1 if to == "velocity" else 2
    k = acceleration_factor(unit) * _OUT_UNITS[to][1]

    def weight(f_hz):
        d = _divisor(f_hz, p, min_hz)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.nan_to_num(k / d, nan=0.0, posinf=0.0)

    return weight, _OUT_UNITS[to][0]


def integrate_order_map(order_map, *, to="velocity", unit="m/s^2", min_hz=DEFAULT_MIN_HZ):
    """An order map of acceleration integrated to velocity (mm/s) or displacement (um).

    Parameters
    ----------
    order_map : OrderMap
        Peak (or RMS) acceleration amplitudes in ``unit``.
    to : {"velocity", "displacement"}
    unit : str
        The channel's unit (an acceleration: m/s^2, mm/s^2 or g).
    min_hz : float
        Bins below this frequency (order x rpm / 60) become NaN.

    Returns
    -------
    OrderMap
        Same axes, amplitudes ``A / (2 pi f)^p`` (p = 1, 2) in mm/s or um.
    """
    checks.choice(None, "to", to, INTEGRATIONS)
    power = 1 if to == "velocity" else 2
    k = acceleration_factor(unit) * _OUT_UNITS[to][1]
    hz = np.asarray(order_map.order, dtype=float)[None, :] * np.asarray(order_map.rpm, dtype=float)[:, None] / 60.0
    amp = k * np.asarray(order_map.amplitude, dtype=float) / _divisor(hz, power, min_hz)
    return replace(order_map, amplitude=amp)


def integrate_frequency_map(rf_map, *, to="velocity", unit="m/s^2", min_hz=DEFAULT_MIN_HZ):
    """A frequency map of acceleration integrated to velocity (mm/s) or displacement (um)."""
    checks.choice(None, "to", to, INTEGRATIONS)
    power = 1 if to == "velocity" else 2
    k = acceleration_factor(unit) * _OUT_UNITS[to][1]
    amp = k * np.asarray(rf_map.amplitude, dtype=float) / _divisor(np.asarray(rf_map.hz)[None, :], power, min_hz)
    return replace(rf_map, amplitude=amp)


def spectrum_from_map(order_map, like):
    """The run-averaged order spectrum of a map: rows averaged on power, weighted by blocks.

    Parameters
    ----------
    order_map : OrderMap
    like : OrderSpectrum
        Gives the spectrum's other attributes (blocks, window...).

    Returns
    -------
    OrderSpectrum
        ``sqrt(sum_i n_i A_i^2 / sum_i n_i)`` per order (NaN bins left out), the RMS average
        the order spectrum makes of its blocks.
    """
    a = np.asarray(order_map.amplitude, dtype=float)
    n = np.asarray(order_map.n_averaged, dtype=float)[:, None] * np.isfinite(a)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.nansum(n * np.where(np.isfinite(a), a, 0.0) ** 2, axis=0) / np.sum(n, axis=0)
    keep = min(len(like.order), a.shape[1])
    amp = np.sqrt(p[:keep])
    return replace(like, order=np.asarray(like.order)[:keep], amplitude=amp)


def correct_rolloff_map(order_map, aa_filter, rate_hz):
    """An order map with the anti-alias filter's known roll-off taken out inside its usable band.

    Parameters
    ----------
    order_map : OrderMap
    aa_filter : AntiAliasFilter
        The acquisition's filter (a plan's ``filter``).
    rate_hz : float
        The run's sample rate, Hz.

    Returns
    -------
    OrderMap
        Each bin at ``f = order x rpm / 60`` up to the filter's usable edge multiplied by
        ``10**(attenuation_db(f) / 20)`` (at most the 1 dB the usable band allows, or the
        passband ripple); bins beyond the edge are left as measured (the roll-off there is steep
        and the filter model's tolerance would be multiplied into the result).
    """
    rate = float(rate_hz)
    edge = min(float(aa_filter.usable_edge_hz(rate)), 0.5 * rate)
    hz = np.asarray(order_map.order, dtype=float)[None, :] * np.asarray(order_map.rpm, dtype=float)[:, None] / 60.0
    inside = hz <= edge
    att = np.zeros_like(hz)
    att[inside] = np.asarray(aa_filter.attenuation_db(hz[inside], rate), dtype=float)
    return replace(order_map, amplitude=np.asarray(order_map.amplitude, dtype=float) * 10.0 ** (att / 20.0))
