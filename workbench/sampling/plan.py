"""Test plan: speed profile, candidate rates, anti-alias filter, protected bands, resampling.

:class:`Plan` holds the speed profile, the candidate sample rates, the anti-alias filter, the
protected bands (:class:`Band`), the resampling settings and the acceptance limits
(:class:`Limit`).  The plan file (TOML) that describes one is read and written by
:mod:`workbench.sampling.planfile`.

``threshold_db``: a folded line collides with a band when its residual -- its ``level_db``
minus the filter's attenuation at its true frequency -- is above this value.  With the default
-60 dB a line at its 0 dB reference level needs more than 60 dB of attenuation to be harmless.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from workbench.errors import InputError, PlanFileError, where
from workbench.checks import RATE_RULE, FieldError, close_names, real, real_array, real_vector
from workbench.sampling.filters import AntiAliasFilter
from workbench.sampling.profiles import SpeedProfile

__all__ = ["Band", "Limit", "LIMIT_AMPLITUDES", "Plan", "DEFAULT_THRESHOLD_DB"]

DEFAULT_THRESHOLD_DB = -60.0

_BAND_KINDS = ("hz", "orders", "around")


def _close(word: str, options) -> str:
    """' (did you mean ...?)' for the nearest of `options`, or ''."""
    match = close_names(word, options, n=3)
    if not match:
        return ""
    return " (did you mean " + " or ".join(repr(m) for m in match) + "?)"


# ------------------------------------------------------------------------------------------
# Band
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Band:
    """A protected frequency region: fixed in Hz, fixed in orders, or around a machine line.

    Parameters
    ----------
    name : str
        Unique name within the plan.
    hz : (float, float), optional
        Fixed limits in Hz, ``0 <= lo < hi``.
    orders : (float, float), optional
        Fixed limits in orders of the reference shaft, ``0 <= lo < hi``.
    around : str, optional
        Name of a machine line (e.g. ``"output NDE bpfo"``); the band follows it.
    width_pct : float, optional
        With `around` only (and required there): the band's *total* width in percent of the
        line's frequency, in (0, 200).  10 means from 0.95 to 1.05 times the line.

    Exactly one of `hz`, `orders`, `around` is given.

    Examples
    --------
    >>> from workbench.sampling import Band
    >>> lo, hi = Band("gear", orders=(20, 40)).limits_hz([600.0, 1200.0])
    >>> lo.tolist(), hi.tolist()
    ([200.0, 400.0], [400.0, 800.0])
    """

    name: str
    hz: tuple[float, float] | None = None
    orders: tuple[float, float] | None = None
    around: str | None = None
    width_pct: float | None = None

    def __post_init__(self):
        owner = "Band"
        if not isinstance(self.name, str) or not self.name.strip():
            raise FieldError(owner, "name", "must be a non-empty text", self.name)
        owner = f"Band {self.name!r}"
        given = [k for k in _BAND_KINDS if getattr(self, k) is not None]
        if len(given) != 1:
            got = ", ".join(given) if given else "none"
            raise FieldError(owner, "hz/orders/around", "give exactly one of hz = [lo, hi], "
                             f"orders = [lo, hi] or around = LINE NAME; got {got}")
        kind = given[0]
        if kind == "around":
            if not isinstance(self.around, str) or not self.around.strip():
                raise FieldError(owner, "around", "must be a line name", self.around)
            if self.width_pct is None:
                raise FieldError(owner, "width_pct", "is required with around (the band's "
                                 "total width, percent of the line's frequency)")
            width = real(owner, "width_pct", self.width_pct, low=0.0, high=200.0,
                         low_open=True, high_open=True)
            object.__setattr__(self, "width_pct", width)
            return
        if self.width_pct is not None:
            raise FieldError(owner, "width_pct", f"is only used with around, not with {kind} "
                             "(remove it)", self.width_pct)
        limits = real_vector(owner, kind, getattr(self, kind), min_len=2)
        if len(limits) != 2:
            raise FieldError(owner, kind, "must be two numbers [lo, hi]", getattr(self, kind))
        lo, hi = limits
        if lo < 0:
            raise FieldError(owner, kind, "lower limit must not be negative", getattr(self, kind))
        if not lo < hi:
            raise FieldError(owner, kind, "lower limit must be below the upper one",
                             getattr(self, kind))
        object.__setattr__(self, kind, limits)

    @property
    def kind(self) -> str:
        """``"hz"``, ``"orders"`` or ``"around"``: how the band is defined."""
        return next(k for k in _BAND_KINDS if getattr(self, k) is not None)

    def limits_hz(self, rpm, lines=()) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper band limits in Hz at reference speeds `rpm`.

        Parameters
        ----------
        rpm : array_like
            Reference shaft speeds in rev/min, finite and not negative.
        lines : iterable of line objects, optional
            Needed for ``around`` bands: objects with a ``name`` and a method
            ``hz_at(rpm) -> ndarray`` (the machine's lines).

        Returns
        -------
        lo, hi : ndarray
            Limits in Hz, each with the shape of `rpm`.  ``hz`` bands are constant;
            ``orders`` bands are ``order * rpm / 60``; ``around`` bands are
            ``f * (1 -/+ width_pct / 200)`` with ``f`` the line's frequency.

        Raises
        ------
        InputError
            A speed is negative or not finite, or the ``around`` line is not among `lines`.
        """
        return self._limits(real_array(rpm, "rpm", "speeds", "rev/min"), lines)

    def _limits(self, speed: np.ndarray, lines=()) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`limits_hz` of a float array of speeds already checked (inside the layer)."""
        if self.hz is not None:
            lo, hi = self.hz
            return np.full(speed.shape, lo), np.full(speed.shape, hi)
        if self.orders is not None:
            lo, hi = self.orders
            shaft_hz = speed / 60.0
            return lo * shaft_hz, hi * shaft_hz
        line = _find_line(lines, self.around)
        if line is None:
            names = [getattr(item, "name", "") for item in lines]
            raise FieldError(f"band {self.name!r}", "around", "the machine has no line of this "
                             f"name{_close(self.around, names)}", self.around)
        f = np.broadcast_to(np.asarray(line.hz_at(speed), dtype=float), speed.shape)
        half = self.width_pct / 200.0
        return f * (1.0 - half), f * (1.0 + half)


def _find_line(lines, name):
    for item in lines:
        if getattr(item, "name", None) == name:
            return item
    return None


# ------------------------------------------------------------------------------------------
# Limit
# ------------------------------------------------------------------------------------------
#: How a limit's ``max`` is expressed: peak amplitude (default) or RMS (peak / sqrt 2).
LIMIT_AMPLITUDES = ("peak", "rms")


@dataclass(frozen=True)
class Limit:
    """An acceptance limit: the highest level a band or an order may reach during the run.

    Limits come from the user, the machine maker or the standard that applies; foldline
    compares the measured level with them, it does not set acceptance criteria.

    Parameters
    ----------
    name : str
        Unique name within the plan.
    max : float
        Highest allowed level, > 0, in the vibration channel's unit (peak amplitude unless
        `amplitude` is ``"rms"``).
    band : str, optional
        Name of a ``[[band]]`` of the plan; its level is the band level of
        :mod:`workbench.runs.levels` (energy sum of the order map's bins inside the band).
    order : float, optional
        An order of the reference shaft, > 0; its level is the order cut over `bandwidth`.
    bandwidth : float, optional
        With `order` only (and required there): total width of the order cut, orders, > 0.
    amplitude : str
        ``"peak"`` (default) or ``"rms"``: how `max` is expressed.  A sinusoid of peak
        amplitude A has RMS A / sqrt(2).
    rpm : (float, float), optional
        Speed range, rpm, ``0 <= lo < hi``, where the limit applies; default the whole run.

    Exactly one of `band` and `order` is given.
    """

    name: str
    max: float
    band: str | None = None
    order: float | None = None
    bandwidth: float | None = None
    amplitude: str = "peak"
    rpm: tuple[float, float] | None = None

    def __post_init__(self):
        owner = "Limit"
        if not isinstance(self.name, str) or not self.name.strip():
            raise FieldError(owner, "name", "must be a non-empty text", self.name)
        owner = f"Limit {self.name!r}"
        object.__setattr__(self, "max", real(owner, "max", self.max, low=0.0, low_open=True))
        if (self.band is None) == (self.order is None):
            got = "both" if self.band is not None else "neither"
            raise FieldError(owner, "band/order", "give exactly one of band = BAND NAME or "
                             f"order = K (with bandwidth in orders); got {got}")
        if self.band is not None:
            if not isinstance(self.band, str) or not self.band.strip():
                raise FieldError(owner, "band", "must be the name of a [[band]] of the plan",
                                 self.band)
            if self.bandwidth is not None:
                raise FieldError(owner, "bandwidth", "is only used with order, not with band "
                                 "(the band gives the width; remove it)", self.bandwidth)
        else:
            object.__setattr__(self, "order", real(owner, "order", self.order, low=0.0,
                                                   low_open=True))
            if self.bandwidth is None:
                raise FieldError(owner, "bandwidth", "is required with order: the total width "
                                 "of the order cut in orders, e.g. 0.5")
            object.__setattr__(self, "bandwidth", real(owner, "bandwidth", self.bandwidth,
                                                       low=0.0, low_open=True))
        if self.amplitude not in LIMIT_AMPLITUDES:
            raise FieldError(owner, "amplitude", f"must be one of {', '.join(LIMIT_AMPLITUDES)}"
                             f"{_close(self.amplitude, LIMIT_AMPLITUDES)}", self.amplitude)
        if self.rpm is not None:
            limits = real_vector(owner, "rpm", self.rpm, min_len=2)
            if len(limits) != 2:
                raise FieldError(owner, "rpm", "must be two speeds [lo, hi] in rpm", self.rpm)
            lo, hi = limits
            if lo < 0 or not lo < hi:
                raise FieldError(owner, "rpm", "must satisfy 0 <= lo < hi (rpm)", self.rpm)
            object.__setattr__(self, "rpm", limits)

    @property
    def kind(self) -> str:
        """``"band"`` or ``"order"``: what the limit judges."""
        return "band" if self.band is not None else "order"

    def describe(self) -> str:
        """One line: what is judged, against what, where (for reports and tables)."""
        what = (f"band {self.band!r}" if self.band is not None
                else f"order {self.order:g} (+-{self.bandwidth / 2:g})")
        where_ = ("whole run" if self.rpm is None
                  else f"{self.rpm[0]:g} to {self.rpm[1]:g} rpm")
        return f"{what} <= {self.max:g} {self.amplitude}, {where_}"


def _named_entries(owner, field_, items, cls, word) -> tuple:
    """``items`` as a tuple of ``cls`` objects with unique names (FieldError otherwise)."""
    if isinstance(items, (str, bytes, cls)):
        raise FieldError(owner, field_, f"must be a sequence of {cls.__name__}")
    items = tuple(items)
    seen = set()
    for item in items:
        if not isinstance(item, cls):
            raise FieldError(owner, field_, f"must hold {cls.__name__} objects, got "
                             f"{type(item).__name__}")
        if item.name in seen:
            raise FieldError(owner, field_, f"{word} name {item.name!r} is used twice; "
                             "names must be unique")
        seen.add(item.name)
    return items


# ------------------------------------------------------------------------------------------
# Plan
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Plan:
    """Everything a test plan says: speed profile, candidate rates, filter, bands, resampling.

    Parameters
    ----------
    speed : SpeedProfile
        The reference shaft's speed during the test.
    rates_hz : tuple of float
        Candidate sample rates in Hz, positive and finite, no repeats; at least one.
    filter : AntiAliasFilter
        The anti-alias filter (fractions of the rate, so one model serves every candidate).
    threshold_db : float
        A folded line collides with a band when its residual (``level_db`` minus attenuation)
        is above this many dB; default -60.
    bands : tuple of Band
        Protected regions, unique names; may be empty.
    max_order : float or None
        Highest order to keep in the angle domain, positive; None lets the advisor choose.
    order_resolution : float or None
        Wanted order resolution, positive; None lets the advisor choose.
    source : str
        Where the plan came from (file name or ``"<dict>"``), for messages; not compared.
    limits : tuple of Limit
        Acceptance limits (unique names; a band limit names one of `bands`); may be empty.
    """

    speed: SpeedProfile
    rates_hz: tuple[float, ...]
    filter: AntiAliasFilter = field(default_factory=AntiAliasFilter)
    threshold_db: float = DEFAULT_THRESHOLD_DB
    bands: tuple[Band, ...] = ()
    max_order: float | None = None
    order_resolution: float | None = None
    source: str = field(default="<dict>", compare=False)
    limits: tuple[Limit, ...] = ()

    def __post_init__(self):
        owner = "Plan"
        if not isinstance(self.speed, SpeedProfile):
            raise FieldError(owner, "speed", f"must be a SpeedProfile, got "
                             f"{type(self.speed).__name__}")
        if not isinstance(self.filter, AntiAliasFilter):
            raise FieldError(owner, "filter", f"must be an AntiAliasFilter, got "
                             f"{type(self.filter).__name__}")
        rates = real_vector(owner, "rates_hz", self.rates_hz, min_len=1)
        for i, r in enumerate(rates):
            if r <= 0:
                raise FieldError(owner, "rates_hz", f"item {i + 1} {RATE_RULE}", self.rates_hz)
        if len(set(rates)) != len(rates):
            twice = next(r for r in rates if rates.count(r) > 1)
            raise FieldError(owner, "rates_hz", f"lists {twice:g} more than once; give each "
                             "rate once", self.rates_hz)
        object.__setattr__(self, "rates_hz", rates)
        object.__setattr__(self, "threshold_db", real(owner, "threshold_db", self.threshold_db))
        bands = _named_entries(owner, "bands", self.bands, Band, "band")
        seen = {band.name for band in bands}
        object.__setattr__(self, "bands", bands)
        for name in ("max_order", "order_resolution"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, real(owner, name, value, low=0.0,
                                                    low_open=True))
        if not isinstance(self.source, str):
            raise FieldError(owner, "source", "must be a text", self.source)
        limits = _named_entries(owner, "limits", self.limits, Limit, "limit")
        for lim in limits:
            if lim.band is not None and lim.band not in seen:
                raise FieldError(owner, "limits", f"limit {lim.name!r}: band: the plan has no "
                                 f"band named {lim.band!r}{_close(lim.band, seen)}")
        object.__setattr__(self, "limits", limits)

    def band(self, name: str) -> Band:
        """The band called `name` (InputError naming close matches if there is none)."""
        for b in self.bands:
            if b.name == name:
                return b
        raise InputError(f"{self.source}: no band named {name!r}"
                         f"{_close(name, [b.name for b in self.bands])}")

    def check_against(self, lines) -> None:
        """Check that every ``around`` band names one of the machine's `lines`.

        Parameters
        ----------
        lines : iterable of line objects
            The machine's lines (objects with a ``name``).

        Raises
        ------
        PlanFileError
            Naming the plan, the band, the unknown line name and the closest line names.
        """
        lines = tuple(lines)
        names = [getattr(line, "name", "") for line in lines]
        known = set(names)
        for b in self.bands:
            if b.around is not None and b.around not in known:
                raise PlanFileError(
                    f"{where(self.source, f'[[band]] {b.name!r}', 'around')}: the machine has "
                    f"no line named {b.around!r}{_close(b.around, names)}")
