"""How a run is tracked: one frozen object that owns every tracking setting and its default.

:class:`TrackingSettings` holds what the analyst chooses (samples per revolution, block length,
highest order, window, cut orders, alias protection, bands, the speed source and its options,
threads) and checks each field itself, naming the field: ``samples_per_rev = 3: must be a
whole number from 8 to 65536``.  The command maps its options to these fields
(``workbench/cli/options.py``) and names the option instead.

The rules that derive one setting from others live here too, once:

* :meth:`TrackingSettings.top_order`: the highest order kept, ``samples_per_rev /
  ANALYSER_FACTOR`` unless given (the analyser convention: a sample rate 2.56 times the
  highest frequency of interest, common practice);
* :meth:`TrackingSettings.tacho_tolerance`: the tacho stage's speed tolerance, from the order
  error budget (:func:`~workbench.angle.pulse_timing.speed_tolerance_for`) unless given;
* :meth:`TrackingSettings.cut_orders_for`: the orders cut when none are asked for
  (the rule of :func:`~workbench.runs.cut_orders.default_cut_orders`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from pathlib import Path

from workbench.angle.scaling import DEFAULT_MIN_HZ, INTEGRATIONS as _INTEGRATIONS
from workbench.checks import FieldError, is_number, positive_int, real, show
from workbench.sampling import ANALYSER_FACTOR

__all__ = ["TrackingSettings", "SettingError", "usable_max_order", "check_speed_sources",
           "ANALYSER_FACTOR", "DEFAULT_SAMPLES_PER_REV", "DEFAULT_REVS_PER_BLOCK",
           "MIN_SAMPLES_PER_REV", "MAX_SAMPLES_PER_REV", "DEFAULT_WINDOW", "SPEED_FIELDS",
           "TRACK_WINDOWS"]

#: Angle-domain samples per revolution when neither the caller nor a plan gives them (orders up
#: to 100 usable).
DEFAULT_SAMPLES_PER_REV = 256
#: Revolutions per FFT block when neither the caller nor a plan gives an order resolution.
DEFAULT_REVS_PER_BLOCK = 16.0
#: Allowed samples per revolution.  2**16 resolves orders up to about 25,000, beyond any
#: machine line; larger values only make the tracker's blocks (revolutions x samples_per_rev
#: values each) exhaust memory.
MIN_SAMPLES_PER_REV = 8
MAX_SAMPLES_PER_REV = 1 << 16
#: Window of the order spectra and maps.
DEFAULT_WINDOW = "hann"
#: Windows offered by name (any window ``scipy.signal.get_window`` knows is accepted).
TRACK_WINDOWS = ("hann", "flattop", "hamming", "blackmanharris", "boxcar")
#: Fields that say where the speed comes from (the keyword options of ``run_speed``).
SPEED_FIELDS = ("tacho", "pulses_per_rev", "missing_pulses", "rpm", "speed_table",
                "speed_tolerance", "speed_order", "speed_range", "speed_channel", "speed_scale")


class SettingError(FieldError):
    """A bad value of one tracking setting: ``field = value: rule``.

    Attributes
    ----------
    field : str
        The setting's name (a :class:`TrackingSettings` field).
    value : object
        The value given.
    problem : str
        What is wrong and what is allowed.
    also : (str, object) or None
        A second field (name, value) the problem is about, for a conflict of two settings:
        ``rpm = 600 and speed_table = "speed.csv": both give the speed; ...``.
    """

    def __init__(self, field: str, value, problem: str, also: tuple | None = None):
        self.owner = "TrackingSettings"
        self.field = field
        self.value = value
        self.problem = problem
        self.also = also
        both = "" if also is None else f" and {also[0]} = {show(also[1])}"
        Exception.__init__(self, f"{field} = {show(value)}{both}: {problem}")


def usable_max_order(samples_per_rev) -> float:
    """Highest order the angle domain shows free of its own filter: ``samples_per_rev /
    ANALYSER_FACTOR`` (the analyser convention, common practice)."""
    return float(samples_per_rev) / ANALYSER_FACTOR


def _number(name, value, *, rule, low=None, low_open=True, high=None):
    """``value`` as float when :func:`workbench.checks.real` accepts it (``high`` excluded);
    else a :class:`SettingError` worded with this setting's ``rule``."""
    try:
        return real(None, name, value, low=low, low_open=low_open, high=high, high_open=True)
    except FieldError:
        raise SettingError(name, value, rule) from None


def _whole(name, value, *, low, rule):
    """``value`` as int when :func:`workbench.checks.positive_int` accepts it (from ``low``);
    else a :class:`SettingError` worded with this setting's ``rule``."""
    try:
        return positive_int(None, name, value, low=low)
    except FieldError:
        raise SettingError(name, value, rule) from None


def _pair(name, value, *, low_closed: bool, unit: str):
    try:
        lo, hi = (float(v) for v in value)
    except (TypeError, ValueError):
        raise SettingError(name, value, f"must be a pair (LO, HI) in {unit}") from None
    ok = (0 <= lo if low_closed else 0 < lo) and lo < hi < math.inf
    if not ok:
        rule = "0 <= LO < HI" if low_closed else "0 < LO < HI"
        raise SettingError(name, value, f"must satisfy {rule} ({unit})")
    return lo, hi


def _channel(name, value):
    if value is None or isinstance(value, str):
        return value
    return _whole(name, value, low=1, rule="must be a 1-based channel index or a channel name")


#: The speed sources, each with the fields that choose it.
_SOURCES = (("speed_order", "speed_range"), ("speed_channel", "speed_scale"), ("rpm",),
            ("speed_table",), ("tacho", "pulses_per_rev", "missing_pulses"))
_ONE_SOURCE = ("both give the speed; allowed: one speed source (the tacho with its wheel, "
               "rpm, speed_table, speed_order with speed_range, or speed_channel with "
               "speed_scale)")
#: Fields that need a partner: (field, partner, what the partner is).
_PARTNERS = (("speed_order", "speed_range", "the rpm range to search, LO, HI"),
             ("speed_channel", "speed_scale", "rpm per unit of the channel"))


def check_speed_sources(**given) -> None:
    """Refuse speed settings that do not make one speed source (the one rule, for the settings
    and for a direct :func:`~workbench.runs.analysis.run_speed` call).

    ``given`` holds speed fields (:data:`SPEED_FIELDS`; None: not given).  Refused: a
    ``speed_range`` without ``speed_order`` (or the reverse), a ``speed_scale`` without
    ``speed_channel`` (or the reverse), and two sources at once (``speed_order`` or
    ``speed_channel`` with any other source or tacho option; ``rpm`` with ``speed_table``).

    Raises
    ------
    SettingError
        Naming the field (and the one it conflicts with).
    """
    has = {k: v for k, v in given.items() if v is not None}
    for lead, partner, _ in _PARTNERS:
        if partner in has and lead not in has:
            why = ("the order whose ridge gives the speed" if lead == "speed_order"
                   else "the channel it scales")
            raise SettingError(partner, has[partner], f"needs {lead} ({why})")
    for lead in ("speed_order", "speed_channel", "rpm"):
        if lead not in has:
            continue
        others = [k for group in _SOURCES if lead not in group for k in group if k in has]
        if lead == "rpm":
            others = [k for k in others if k == "speed_table"]
        if others:
            raise SettingError(lead, has[lead], _ONE_SOURCE, also=(others[0], has[others[0]]))
    for lead, partner, what in _PARTNERS:
        if lead in has and partner not in has:
            raise SettingError(lead, has[lead], f"needs {partner} ({what})")


@dataclass(frozen=True)
class TrackingSettings:
    """Every setting of the tracking of a run, with its default.

    Attributes
    ----------
    samples_per_rev : int
        Angle-domain samples per revolution, 8 to 65536 (default 256: orders up to 100).
    revs_per_block : float
        Revolutions per FFT block (order resolution = 1 / revs_per_block); default 16.
    max_order : float or None
        Highest order kept in the spectrum and the map; None: ``samples_per_rev /
        ANALYSER_FACTOR`` (:attr:`top_order`).
    window : str
        Window of the order spectra and maps (default Hann).
    protect : bool
        Alias protection of the order tracking (default on).
    cut_orders : tuple of float
        Orders cut out of the map; empty: :meth:`cut_orders_for`.
    cut_bandwidth_orders : float or None
        Band summed in each cut, orders (default 4 bins).
    envelope_hz : (float, float) or None
        Demodulation band of the envelope order spectrum, Hz (None: no envelope).
    overall_band_hz : (float, float) or None
        Band of the overall level, Hz (None: the whole band, DC removed).
    integrate : {None, "velocity", "displacement"}
        The overall level of an acceleration channel integrated (the order results are
        integrated when shown, :func:`~workbench.runs.scaled.scaled_analysis`).
    integrate_from_hz : float
        Lowest frequency integrated, Hz.
    rf_map : bool
        Compute the frequency map (a second pass over the record).
    aa_filter : AntiAliasFilter or None
        The acquisition's anti-alias filter: its usable edge bounds the valid region.
    tacho, pulses_per_rev, missing_pulses : optional
        Tacho channel (1-based index or name) and wheel; default the run sidecar's.
    rpm : float or None
        A constant speed standing in for a tacho, rpm.
    speed_table : path or None
        CSV ``time_s, rpm`` standing in for a tacho.
    speed_tolerance : float or None
        RMS relative speed uncertainty the tacho stage aims at (a fraction); None:
        :attr:`tacho_tolerance`.
    speed_order, speed_range : float, (float, float) or None
        Speed from the ridge of this order searched over this rpm range.
    speed_channel, speed_scale : optional
        Speed from an analogue channel times this many rpm per unit.
    threads : int or None
        Threads tracking blocks (None: the machine's cores); the result does not depend on it.
    """

    samples_per_rev: int = DEFAULT_SAMPLES_PER_REV
    revs_per_block: float = DEFAULT_REVS_PER_BLOCK
    max_order: float | None = None
    window: str = DEFAULT_WINDOW
    protect: bool = True
    cut_orders: tuple = ()
    cut_bandwidth_orders: float | None = None
    envelope_hz: tuple | None = None
    overall_band_hz: tuple | None = None
    integrate: str | None = None
    integrate_from_hz: float = DEFAULT_MIN_HZ
    rf_map: bool = True
    aa_filter: object = None
    tacho: object = None
    pulses_per_rev: int | None = None
    missing_pulses: int | None = None
    rpm: float | None = None
    speed_table: object = None
    speed_tolerance: float | None = None
    speed_order: float | None = None
    speed_range: tuple | None = None
    speed_channel: object = None
    speed_scale: float | None = None
    threads: int | None = None

    def __post_init__(self):
        put = lambda name, v: object.__setattr__(self, name, v)  # noqa: E731
        put("samples_per_rev", _whole(
            "samples_per_rev", self.samples_per_rev, low=MIN_SAMPLES_PER_REV,
            rule=f"must be a whole number from {MIN_SAMPLES_PER_REV} to {MAX_SAMPLES_PER_REV}"))
        if self.samples_per_rev > MAX_SAMPLES_PER_REV:
            raise SettingError("samples_per_rev", self.samples_per_rev, f"must be a whole number "
                               f"from {MIN_SAMPLES_PER_REV} to {MAX_SAMPLES_PER_REV}")
        put("revs_per_block", _number("revs_per_block", self.revs_per_block, low=0.0,
                                      rule="must be a positive number of revolutions"))
        if self.max_order is not None:
            put("max_order", _number("max_order", self.max_order, low=0.0,
                                     rule="must be a positive order"))
        if not isinstance(self.window, str) or not self.window:
            raise SettingError("window", self.window, "must be a window name; allowed: "
                               + ", ".join(TRACK_WINDOWS))
        put("protect", bool(self.protect))
        put("rf_map", bool(self.rf_map))
        orders = () if self.cut_orders is None else self.cut_orders
        if isinstance(orders, (str, bytes)) or not hasattr(orders, "__iter__"):
            orders = (orders,)
        out = []
        for o in orders:
            if not is_number(o) or not (0 < float(o) < math.inf):
                raise SettingError("cut_orders", self.cut_orders, "every order must be a positive "
                                   "number")
            out.append(float(o))
        put("cut_orders", tuple(out))
        if self.cut_bandwidth_orders is not None:
            put("cut_bandwidth_orders", _number("cut_bandwidth_orders", self.cut_bandwidth_orders,
                                                low=0.0, rule="must be a positive width in orders"))
        if self.envelope_hz is not None:
            put("envelope_hz", _pair("envelope_hz", self.envelope_hz, low_closed=False, unit="Hz"))
        if self.overall_band_hz is not None:
            put("overall_band_hz", _pair("overall_band_hz", self.overall_band_hz, low_closed=True,
                                         unit="Hz"))
        if self.integrate is not None and self.integrate not in _INTEGRATIONS:
            raise SettingError("integrate", self.integrate, "allowed: " + ", ".join(_INTEGRATIONS))
        put("integrate_from_hz", _number("integrate_from_hz", self.integrate_from_hz, low=0.0,
                                         rule="must be a positive frequency in Hz"))
        put("tacho", _channel("tacho", self.tacho))
        put("speed_channel", _channel("speed_channel", self.speed_channel))
        if self.pulses_per_rev is not None:
            put("pulses_per_rev", _whole("pulses_per_rev", self.pulses_per_rev, low=1,
                                         rule="must be a whole number of pulses, 1 or more"))
        if self.missing_pulses is not None:
            put("missing_pulses", _whole("missing_pulses", self.missing_pulses, low=0,
                                         rule="must be a whole number of teeth, 0 or more"))
        if self.rpm is not None:
            put("rpm", _number("rpm", self.rpm, low=0.0, rule="must be a positive speed in rpm"))
        if self.speed_table is not None:
            if not isinstance(self.speed_table, (str, Path)):
                raise SettingError("speed_table", self.speed_table, "must be the path of a CSV file")
            put("speed_table", str(self.speed_table))
        if self.speed_tolerance is not None:
            put("speed_tolerance", _number("speed_tolerance", self.speed_tolerance, low=0.0, high=1.0,
                                           rule="must be a fraction between 0 and 1"))
        if self.speed_order is not None:
            put("speed_order", _number("speed_order", self.speed_order, low=0.0,
                                       rule="must be a positive order"))
        if self.speed_range is not None:
            put("speed_range", _pair("speed_range", self.speed_range, low_closed=False, unit="rpm"))
        if self.speed_scale is not None:
            put("speed_scale", _number("speed_scale", self.speed_scale,
                                       rule="must be a finite number of rpm per unit"))
        check_speed_sources(**{k: getattr(self, k) for k in SPEED_FIELDS})
        if self.threads is not None:
            put("threads", _whole("threads", self.threads, low=1,
                                  rule="must be a whole number of threads, 1 or more"))

    # -- construction ----------------------------------------------------------------------
    @classmethod
    def from_options(cls, base=None, **options) -> "TrackingSettings":
        """Settings from keyword options (None means "the default"), on top of ``base``.

        Unknown names raise :class:`SettingError` naming the allowed fields.
        """
        names = {f.name for f in fields(cls)}
        unknown = sorted(set(options) - names)
        if unknown:
            raise SettingError(unknown[0], options[unknown[0]],
                               "not a tracking setting; allowed: " + ", ".join(sorted(names)))
        given = {k: v for k, v in options.items() if v is not None}
        if "cut_orders" in given and not given["cut_orders"]:
            given["cut_orders"] = ()
        return replace(base, **given) if base is not None else cls(**given)

    @classmethod
    def for_plan(cls, machine, plan, **options) -> "TrackingSettings":
        """Settings with the plan's angle-domain settings (the advisor's samples per rev and
        revs per block) and anti-alias filter as defaults, then ``options`` on top."""
        import warnings

        from workbench.errors import FoldlineWarning
        from workbench.sampling import angle_settings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FoldlineWarning)
            rs = angle_settings(machine, plan)
        base = cls(samples_per_rev=rs.samples_per_rev, revs_per_block=float(rs.revs_per_block),
                   aa_filter=plan.filter)
        return cls.from_options(base, **options)

    # -- derived values ---------------------------------------------------------------------
    @property
    def top_order(self) -> float:
        """Highest order kept: ``max_order``, or ``samples_per_rev / ANALYSER_FACTOR``."""
        return usable_max_order(self.samples_per_rev) if self.max_order is None else float(self.max_order)

    @property
    def tacho_tolerance(self) -> float:
        """Speed tolerance of the tacho stage: ``speed_tolerance``, or the order error budget
        at :attr:`top_order` and ``revs_per_block``."""
        if self.speed_tolerance is not None:
            return float(self.speed_tolerance)
        from workbench.angle import speed_tolerance_for

        return speed_tolerance_for(self.top_order, self.revs_per_block)

    @property
    def speed_options(self) -> dict:
        """The speed fields that are set, as keyword options of ``run_speed``."""
        return {k: getattr(self, k) for k in SPEED_FIELDS if getattr(self, k) is not None}

    def cut_orders_for(self, *, machine=None, plan=None, peaks=None) -> tuple:
        """The orders cut: ``cut_orders``, else the one default rule
        (:func:`~workbench.runs.cut_orders.default_cut_orders`) up to :attr:`top_order`."""
        if self.cut_orders:
            return tuple(self.cut_orders)
        from workbench.runs.cut_orders import default_cut_orders

        return default_cut_orders(machine, plan, max_order=self.top_order, peaks=peaks)

    def changed(self, other: "TrackingSettings") -> tuple:
        """Names of the fields whose values differ from ``other``'s."""
        return tuple(f.name for f in fields(self) if getattr(self, f.name) != getattr(other, f.name))

    def to_dict(self) -> dict:
        """The settings that are set, JSON-friendly (the filter described)."""
        out = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if v is None or (f.name == "cut_orders" and not v):
                continue
            if f.name == "aa_filter":
                v = v.describe() if hasattr(v, "describe") else str(v)
            elif isinstance(v, tuple):
                v = list(v)
            out[f.name] = v
        out["max_order"] = self.top_order
        return out
