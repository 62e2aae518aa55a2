"""The drive train: shafts, sources, speed ratios and the lines each source expands into.

A :class:`Machine` holds shafts and sources (gear stages, planetary stages, bearings, rotors,
orders and fixed lines).  :meth:`Machine.shaft_orders` walks the train from the reference shaft
and gives each shaft's speed as a multiple of the reference speed; :meth:`Machine.lines` expands
every source into :class:`Line` objects, one frequency track each, with orders relative to the
reference shaft.

Speeds inside this module are unit-free multiples (orders) unless a name says otherwise; the
helper functions :func:`bearing_frequencies` and :func:`planetary_frequencies` accept any
consistent speed unit (Hz, orders, rev/min) and return frequencies in that unit.

Every constructor validates its fields and raises :class:`~workbench.errors.MachineFileError`
with a message naming the entry, the field, the bad value and what is allowed, e.g.
``"[[bearing]] 'output NDE': contact_angle_deg = 95: must be >= 0 and < 90"``.  The machine file
reader adds the file name in front.
"""

from __future__ import annotations

import difflib
import math
import numbers
import warnings
from collections import deque
from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import ClassVar, Union

import numpy as np

from workbench.errors import FoldlineWarning, InputError, MachineFileError, TrainError, where

__all__ = [
    "FIXED",
    "LINE_KINDS",
    "KIND_NAMES",
    "kind_name",
    "MODE_TYPES",
    "ROTATING_RACES",
    "SOURCE_TYPES",
    "Bearing",
    "BearingFrequencies",
    "Critical",
    "DEFAULT_DAMPING_RATIO",
    "FixedLine",
    "GearStage",
    "Line",
    "Machine",
    "OrderSource",
    "PlanetaryFrequencies",
    "PlanetaryStage",
    "Resonance",
    "Rotor",
    "Shaft",
    "Source",
    "bearing_frequencies",
    "planetary_frequencies",
]

#: Word that marks the member of a planetary stage held still (sun, carrier or ring).
FIXED = "fixed"

#: Allowed values of :attr:`Bearing.rotating_race`.
ROTATING_RACES = ("inner", "outer")

#: Every ``Line.kind`` (fixed contract).
LINE_KINDS = (
    "shaft",
    "mesh",
    "sideband",
    "ftf",
    "bpfo",
    "bpfi",
    "bsf",
    "rotor",
    "order",
    "line",
    "planet_pass",
    "planet_spin",
    "sun_fault",
    "planet_fault",
    "ring_fault",
)

#: How each ``Line.kind`` reads in legends and tables (the key stays in files and JSON).
KIND_NAMES = {
    "shaft": "shaft",
    "mesh": "gear mesh",
    "sideband": "sideband",
    "ftf": "cage (FTF)",
    "bpfo": "outer race (BPFO)",
    "bpfi": "inner race (BPFI)",
    "bsf": "rolling element (BSF)",
    "rotor": "blade or vane pass",
    "order": "order",
    "line": "fixed line",
    "planet_pass": "planet pass",
    "planet_spin": "planet spin",
    "sun_fault": "sun fault",
    "planet_fault": "planet fault",
    "ring_fault": "ring fault",
}


def kind_name(kind: str) -> str:
    """The readable name of a line kind ("planet_pass" -> "planet pass"); unknown keys as given."""
    return KIND_NAMES.get(kind, str(kind).replace("_", " "))

# Relative tolerance for two routes through the train giving one shaft the same speed.
_TRAIN_RTOL = 1e-9

# Upper limits of the expansion counts: each harmonic (and each sideband pair) is one more line
# object per source, so a typo such as harmonics = 100000000 would otherwise exhaust memory.
MAX_HARMONICS = 1000
MAX_SIDEBANDS = 100


# --------------------------------------------------------------------------------------------
# Field checks (shared by every dataclass; messages name entry, field, value and what is allowed)
# --------------------------------------------------------------------------------------------


def _fmt(value: object) -> str:
    """Show a value the way it is written in a machine file (TOML)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return repr(value) if not isinstance(value, numbers.Number) else str(value)


def _kind_of(value: object) -> str:
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, str):
        return "a string"
    if isinstance(value, numbers.Integral):
        return "an integer"
    if isinstance(value, numbers.Real):
        return "a number"
    if isinstance(value, (list, tuple)):
        return "an array"
    if isinstance(value, Mapping):
        return "a table"
    return type(value).__name__


def _error(label: str, field: str, value: object, allowed: str, cls=MachineFileError):
    return cls(f"{where(None, label, f'{field} = {_fmt(value)}')}: {allowed}")


def _check_int(
    label: str, field: str, value: object, minimum: int, *, maximum: int | None = None,
    cls=MachineFileError,
) -> int:
    word = "a positive integer" if minimum == 1 else f"an integer >= {minimum}"
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise _error(label, field, value, f"must be {word} (got {_kind_of(value)})", cls=cls)
    if value < minimum:
        raise _error(label, field, value, f"must be {word}", cls=cls)
    if maximum is not None and value > maximum:
        raise _error(label, field, value, f"must be an integer from {minimum} to {maximum}",
                     cls=cls)
    return int(value)


def _check_real(
    label: str, field: str, value: object, *, positive: bool = False, cls=MachineFileError
) -> float:
    word = "a positive number" if positive else "a finite number"
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise _error(label, field, value, f"must be {word} (got {_kind_of(value)})", cls=cls)
    number = float(value)
    if not math.isfinite(number):
        raise _error(label, field, value, f"must be {word} (not inf or nan)", cls=cls)
    if positive and number <= 0:
        raise _error(label, field, value, f"must be {word} (> 0)", cls=cls)
    return number


def _check_name(label: str, field: str, value: object, *, cls=MachineFileError) -> str:
    allowed = (
        "must be a non-empty string of printable characters without leading or trailing spaces"
    )
    if not isinstance(value, str):
        raise _error(label, field, value, f"{allowed} (got {_kind_of(value)})", cls=cls)
    if not value or value != value.strip() or not value.isprintable():
        raise _error(label, field, value, allowed, cls=cls)
    return value


def _suggest(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f"; did you mean {_fmt(close[0])}?" if close else ""


def _set(obj, name: str, value) -> None:
    object.__setattr__(obj, name, value)


# --------------------------------------------------------------------------------------------
# Lines
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Line:
    """One frequency track of a machine: a harmonic, a sideband or a defect order.

    Exactly one of `order` and `hz` is given: an order line moves with speed, a fixed line
    (``kind == "line"``) stays at `hz`.

    Parameters
    ----------
    name : str
        Unique name in its machine: ``"<entry> <kind>"`` plus ``" x<h>"`` when `harmonic` > 1,
        e.g. ``"output NDE bpfo"``, ``"stage 1 mesh x2"``; sidebands are
        ``"<entry> sideband [x<h> ]<+|-><m> <shaft>"``.
    entry : str
        Name of the source (or shaft) the line comes from.
    kind : str
        One of :data:`LINE_KINDS`.
    harmonic : int
        Harmonic number h >= 1 (for a sideband, the mesh harmonic it sits around).
    order : float or None
        Frequency as a multiple of the reference shaft speed (> 0), or None for a fixed line.
    hz : float or None
        Fixed frequency in Hz (> 0), or None for an order line.
    level_db : float
        Source level in dB relative to the line's own reference (default 0).
    """

    name: str
    entry: str
    kind: str
    harmonic: int
    order: float | None = None
    hz: float | None = None
    level_db: float = 0.0

    def __post_init__(self) -> None:
        label = f"line '{self.name}'"
        if not isinstance(self.name, str) or not self.name:
            raise InputError(f"line name = {self.name!r}: must be a non-empty string")
        if self.kind not in LINE_KINDS:
            raise InputError(
                f"{label}: kind = {self.kind!r}: must be one of {', '.join(LINE_KINDS)}"
            )
        _set(self, "harmonic", _check_int(label, "harmonic", self.harmonic, 1, cls=InputError))
        if (self.order is None) == (self.hz is None):
            raise InputError(
                f"{label}: order = {self.order!r}, hz = {self.hz!r}: give exactly one of "
                "order (a line that moves with speed) or hz (a fixed line)"
            )
        for field in ("order", "hz"):
            if getattr(self, field) is not None:
                value = getattr(self, field)
                _set(self, field, _check_real(label, field, value, positive=True, cls=InputError))
        _set(self, "level_db", _check_real(label, "level_db", self.level_db, cls=InputError))

    @property
    def moves_with_speed(self) -> bool:
        """True for an order line, False for a fixed-frequency line."""
        return self.order is not None

    def hz_at(self, rpm) -> np.ndarray:
        """True frequency of the line at reference shaft speed(s) `rpm`.

        Parameters
        ----------
        rpm : float or array_like
            Reference shaft speed in rev/min, any shape.

        Returns
        -------
        ndarray
            Frequency in Hz, same shape as `rpm`: ``order * rpm / 60`` for an order line,
            `hz` broadcast to the shape of `rpm` for a fixed line.
        """
        rpm = np.asarray(rpm, dtype=float)
        if self.order is not None:
            return self.order * rpm / 60.0
        return np.full(rpm.shape, self.hz, dtype=float)

    def order_at(self, rpm) -> np.ndarray:
        """The line as a multiple of the reference shaft speed at speed(s) `rpm`.

        Parameters
        ----------
        rpm : float or array_like
            Reference shaft speed in rev/min, any shape.

        Returns
        -------
        ndarray
            Order, same shape as `rpm`: `order` broadcast for an order line, ``hz * 60 / rpm``
            for a fixed line (inf where `rpm` is 0).
        """
        rpm = np.asarray(rpm, dtype=float)
        if self.order is not None:
            return np.full(rpm.shape, self.order, dtype=float)
        with np.errstate(divide="ignore"):
            return self.hz * 60.0 / rpm


def _line(entry: str, kind: str, h: int, level_db: float, *, order=None, hz=None) -> Line:
    suffix = f" x{h}" if h > 1 else ""
    return Line(f"{entry} {kind}{suffix}", entry, kind, h, order=order, hz=hz, level_db=level_db)


# --------------------------------------------------------------------------------------------
# Closed-form frequencies
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class BearingFrequencies:
    """Defect frequencies of a rolling-element bearing (same unit as the race speeds given).

    Attributes
    ----------
    ftf : float or ndarray
        Fundamental train (cage) frequency, ``|f_c|``.
    bpfo : float or ndarray
        Ball pass frequency, outer race.
    bpfi : float or ndarray
        Ball pass frequency, inner race.
    bsf : float or ndarray
        Ball (rolling element) spin frequency; a defect striking both races shows at 2 x BSF.
    """

    ftf: float | np.ndarray
    bpfo: float | np.ndarray
    bpfi: float | np.ndarray
    bsf: float | np.ndarray


def bearing_frequencies(
    inner,
    outer,
    *,
    rolling_elements: int,
    element_diameter: float,
    pitch_diameter: float,
    contact_angle_deg: float = 0.0,
) -> BearingFrequencies:
    """Rolling-element bearing defect frequencies for any inner and outer race speeds.

    With ``r = (d / D) cos(alpha)`` the cage turns at ``f_c = f_i (1 - r)/2 + f_o (1 + r)/2``
    and ``BPFO = N |f_o - f_c|``, ``BPFI = N |f_i - f_c|``,
    ``BSF = D / (2 d) |f_i - f_o| (1 - r**2)``, ``FTF = |f_c|``.

    Parameters
    ----------
    inner, outer : float or array_like
        Inner and outer race speeds (signed, any consistent unit: Hz, orders...); broadcast
        together.
    rolling_elements : int
        Number of rolling elements N.
    element_diameter, pitch_diameter : float
        Rolling element diameter d and pitch diameter D, same length unit, 0 < d < D.
    contact_angle_deg : float, optional
        Contact angle alpha in degrees, 0 <= alpha < 90 (default 0).

    Returns
    -------
    BearingFrequencies
        `ftf`, `bpfo`, `bpfi`, `bsf` in the unit of the race speeds, broadcast shape.

    References
    ----------
    .. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A tutorial",
       Mechanical Systems and Signal Processing 25(2):485-520, 2011.

    Examples
    --------
    >>> f = bearing_frequencies(1.0, 0.0, rolling_elements=9, element_diameter=0.3126,
    ...                         pitch_diameter=1.537)
    >>> print(f"{f.bpfi:.4f} {f.bpfo:.4f} {f.ftf:.4f} {2 * f.bsf:.4f}")
    5.4152 3.5848 0.3983 4.7134
    """
    label = "bearing_frequencies"
    n = _check_int(label, "rolling_elements", rolling_elements, 1, cls=InputError)
    d = _check_real(label, "element_diameter", element_diameter, positive=True, cls=InputError)
    big_d = _check_real(label, "pitch_diameter", pitch_diameter, positive=True, cls=InputError)
    alpha = _check_real(label, "contact_angle_deg", contact_angle_deg, cls=InputError)
    if d >= big_d:
        raise InputError(
            f"{label}: element_diameter = {d} >= pitch_diameter = {big_d}: the rolling element "
            "diameter must be smaller than the pitch diameter"
        )
    if not 0.0 <= alpha < 90.0:
        raise InputError(f"{label}: contact_angle_deg = {alpha}: must be >= 0 and < 90")
    f_i = np.asarray(inner, dtype=float)
    f_o = np.asarray(outer, dtype=float)
    r = d / big_d * math.cos(math.radians(alpha))
    f_c = f_i * (1.0 - r) / 2.0 + f_o * (1.0 + r) / 2.0
    out = BearingFrequencies(
        ftf=np.abs(f_c),
        bpfo=n * np.abs(f_o - f_c),
        bpfi=n * np.abs(f_i - f_c),
        bsf=big_d / (2.0 * d) * np.abs(f_i - f_o) * (1.0 - r * r),
    )
    if np.ndim(f_c) == 0:
        out = BearingFrequencies(*(float(getattr(out, f.name)) for f in fields(out)))
    return out


@dataclass(frozen=True)
class PlanetaryFrequencies:
    """Characteristic frequencies of a planetary gear set (same unit as the member speeds).

    Attributes
    ----------
    mesh : float or ndarray
        Gear mesh frequency ``f_m = Z_s |f_s - f_c| = Z_r |f_r - f_c|``.
    planet_pass : float or ndarray
        Planets passing a point of the ring, ``N_p |f_r - f_c|``.
    planet_spin : float or ndarray
        Planet speed relative to the carrier, ``f_m / Z_p``.
    sun_fault : float or ndarray
        A local sun tooth fault meeting the planets, ``N_p f_m / Z_s``.
    planet_fault : float or ndarray
        A local planet tooth fault meeting sun and ring, ``2 f_m / Z_p``.
    ring_fault : float or ndarray
        A local ring tooth fault meeting the planets, ``N_p f_m / Z_r``.
    """

    mesh: float | np.ndarray
    planet_pass: float | np.ndarray
    planet_spin: float | np.ndarray
    sun_fault: float | np.ndarray
    planet_fault: float | np.ndarray
    ring_fault: float | np.ndarray


def planetary_frequencies(
    sun,
    carrier,
    ring,
    *,
    sun_teeth: int,
    planet_teeth: int,
    ring_teeth: int,
    planets: int,
) -> PlanetaryFrequencies:
    """Mesh, planet-pass, planet-spin and tooth-fault frequencies of a planetary gear set.

    The three member speeds must satisfy the Willis equation
    ``(f_s - f_c) / (f_r - f_c) = -Z_r / Z_s``, i.e. ``Z_s (f_s - f_c) + Z_r (f_r - f_c) = 0``.

    Parameters
    ----------
    sun, carrier, ring : float or array_like
        Signed speeds f_s, f_c, f_r of sun, carrier and ring (any consistent unit), broadcast
        together; a fixed member is 0.
    sun_teeth, planet_teeth, ring_teeth : int
        Tooth counts Z_s, Z_p, Z_r.
    planets : int
        Number of planets N_p.

    Returns
    -------
    PlanetaryFrequencies
        In the unit of the member speeds, broadcast shape.

    Raises
    ------
    InputError
        If the speeds do not satisfy the Willis equation (relative tolerance 1e-9).

    References
    ----------
    .. [1] P. D. McFadden and J. D. Smith, "An explanation for the asymmetry of the modulation
       sidebands about the tooth meshing frequency in epicyclic gear vibration", Proceedings of
       the Institution of Mechanical Engineers, Part C 199(1):65-70, 1985.

    Examples
    --------
    Ring fixed, sun at 1: the carrier turns at Z_s / (Z_s + Z_r).

    >>> zs, zr = 21, 87
    >>> f = planetary_frequencies(1.0, zs / (zs + zr), 0.0, sun_teeth=zs, planet_teeth=33,
    ...                           ring_teeth=zr, planets=3)
    >>> print(f"{f.mesh:.4f} {f.planet_pass:.4f}")
    16.9167 0.5833
    """
    label = "planetary_frequencies"
    z_s, z_p, z_r, n_p = (
        _check_int(label, field, value, 1, cls=InputError)
        for field, value in (
            ("sun_teeth", sun_teeth), ("planet_teeth", planet_teeth),
            ("ring_teeth", ring_teeth), ("planets", planets),
        )
    )
    f_s, f_c, f_r = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (sun, carrier, ring)))
    sun_rel = f_s - f_c
    ring_rel = f_r - f_c
    residue = np.abs(z_s * sun_rel + z_r * ring_rel)
    scale = z_s * np.abs(sun_rel) + z_r * np.abs(ring_rel) + z_s * np.abs(f_c)
    if np.any(residue > 1e-9 * scale):
        raise InputError(
            f"{label}: the speeds sun = {sun}, carrier = {carrier}, ring = {ring} do not satisfy "
            "the Willis equation (f_s - f_c)/(f_r - f_c) = -Z_r/Z_s for "
            f"Z_s = {z_s}, Z_r = {z_r}"
        )
    mesh = z_s * np.abs(sun_rel)
    out = PlanetaryFrequencies(
        mesh=mesh,
        planet_pass=n_p * np.abs(ring_rel),
        planet_spin=mesh / z_p,
        sun_fault=n_p * mesh / z_s,
        planet_fault=2.0 * mesh / z_p,
        ring_fault=n_p * mesh / z_r,
    )
    if np.ndim(mesh) == 0:
        out = PlanetaryFrequencies(*(float(getattr(out, f.name)) for f in fields(out)))
    return out


# --------------------------------------------------------------------------------------------
# Shafts and sources
# --------------------------------------------------------------------------------------------


class _Entry:
    """Behaviour shared by shafts and sources (not a dataclass itself)."""

    table: ClassVar[str] = ""

    @property
    def label(self) -> str:
        """Where the entry sits in a machine file, e.g. ``"[[bearing]] 'output NDE'"``."""
        return f"[[{self.table}]] '{self.name}'"

    def shafts_used(self) -> tuple[tuple[str, str], ...]:
        """``(field, shaft name)`` pairs of every shaft the entry refers to."""
        return ()

    def speed_links(self) -> tuple[tuple[str, str, float], ...]:
        """Speed constraints ``(shaft_a, shaft_b, k)`` meaning ``speed(b) = k * speed(a)``."""
        return ()

    def _check_common(self) -> str:
        label = f"[[{self.table}]]"
        _check_name(label, "name", self.name)
        label = self.label
        if hasattr(self, "harmonics"):
            _set(self, "harmonics",
                 _check_int(label, "harmonics", self.harmonics, 1, maximum=MAX_HARMONICS))
        if hasattr(self, "level_db"):
            _set(self, "level_db", _check_real(label, "level_db", self.level_db))
        return label


@dataclass(frozen=True)
class Shaft(_Entry):
    """A shaft of the drive train.

    Parameters
    ----------
    name : str
        Unique name; ``"fixed"`` is reserved.

    Notes
    -----
    Each shaft gives one line, ``"<name> shaft"`` (kind ``shaft``), at its speed order.
    """

    name: str
    table: ClassVar[str] = "shaft"

    def __post_init__(self) -> None:
        label = self._check_common()
        if self.name == FIXED:
            raise _error(
                label, "name", self.name,
                f'"{FIXED}" is reserved for the held member of a planetary stage; rename the shaft',
            )

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """The shaft's own line at its order (one harmonic)."""
        return (_line(self.name, "shaft", 1, 0.0, order=shaft_orders[self.name]),)


@dataclass(frozen=True)
class GearStage(_Entry):
    """A parallel-axis gear pair.

    Parameters
    ----------
    name : str
        Entry name, e.g. ``"stage 1"``.
    driver, driven : str
        Shaft names of the two gears (different shafts).
    driver_teeth, driven_teeth : int
        Tooth counts Z_driver, Z_driven (>= 1).
    harmonics : int
        Mesh harmonics to expand, 1 to :data:`MAX_HARMONICS` (default 3).
    sidebands : int
        Sideband pairs around each mesh harmonic, at both shaft speeds, 0 to
        :data:`MAX_SIDEBANDS` (default 0).
    level_db : float
        Source level in dB (default 0).

    Notes
    -----
    Speeds: ``f_driven = f_driver Z_driver / Z_driven``; mesh frequency
    ``f_m = Z_driver f_driver = Z_driven f_driven``.  Lines: ``mesh`` at ``h f_m`` and, for
    ``m = 1..sidebands``, ``sideband`` at ``h f_m -/+ m f_driver`` and ``h f_m -/+ m f_driven``
    (a sideband at or below zero order is left out).
    """

    name: str
    driver: str
    driven: str
    driver_teeth: int
    driven_teeth: int
    harmonics: int = 3
    sidebands: int = 0
    level_db: float = 0.0
    table: ClassVar[str] = "gear_stage"

    def __post_init__(self) -> None:
        label = self._check_common()
        for field in ("driver", "driven"):
            _check_name(label, field, getattr(self, field))
        for field in ("driver_teeth", "driven_teeth"):
            _set(self, field, _check_int(label, field, getattr(self, field), 1))
        _set(self, "sidebands",
             _check_int(label, "sidebands", self.sidebands, 0, maximum=MAX_SIDEBANDS))
        if self.driver == self.driven:
            raise _error(
                label, "driven", self.driven, "must be a different shaft from driver"
            )

    def shafts_used(self):
        return (("driver", self.driver), ("driven", self.driven))

    def speed_links(self):
        return ((self.driver, self.driven, self.driver_teeth / self.driven_teeth),)

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """Mesh harmonics, each followed by its sidebands (orders of the reference shaft)."""
        f_driver = shaft_orders[self.driver]
        f_driven = shaft_orders[self.driven]
        mesh = self.driver_teeth * f_driver
        out = []
        for h in range(1, self.harmonics + 1):
            centre = h * mesh
            out.append(_line(self.name, "mesh", h, self.level_db, order=centre))
            hx = f"x{h} " if h > 1 else ""
            for shaft, f in ((self.driver, f_driver), (self.driven, f_driven)):
                for m in range(1, self.sidebands + 1):
                    for sign in ("-", "+"):
                        order = centre - m * f if sign == "-" else centre + m * f
                        if order <= 1e-9 * centre:
                            continue
                        out.append(
                            Line(
                                f"{self.name} sideband {hx}{sign}{m} {shaft}",
                                self.name, "sideband", h, order=order, level_db=self.level_db,
                            )
                        )
        return tuple(out)


_PLANETARY_MEMBERS = ("sun", "carrier", "ring")
_PLANETARY_KINDS = ("mesh", "planet_pass", "planet_spin", "sun_fault", "planet_fault", "ring_fault")


@dataclass(frozen=True)
class PlanetaryStage(_Entry):
    """A simple planetary (epicyclic) gear set with one member held.

    Parameters
    ----------
    name : str
        Entry name.
    sun_teeth, planet_teeth, ring_teeth : int
        Tooth counts Z_s, Z_p, Z_r (>= 1).  ``Z_r = Z_s + 2 Z_p`` for standard gears; other
        counts (profile-shifted gears) are kept with a :class:`FoldlineWarning`.
    planets : int
        Number of planets N_p (>= 1).
    sun, carrier, ring : str
        Shaft name of each member, or ``"fixed"`` for the held one (exactly one).
    harmonics : int
        Harmonics of each line kind (default 3).
    level_db : float
        Source level in dB (default 0).

    Notes
    -----
    The two turning members are tied by the Willis equation
    ``(f_s - f_c) / (f_r - f_c) = -Z_r / Z_s`` with the held member at 0: ring held,
    ``f_c = f_s Z_s / (Z_s + Z_r)``; sun held, ``f_c = f_r Z_r / (Z_s + Z_r)``; carrier held,
    ``f_r = -f_s Z_s / Z_r`` (the ring turns the other way; shaft orders are speed magnitudes).
    Lines (see :func:`planetary_frequencies`): ``mesh``, ``planet_pass``, ``planet_spin``,
    ``sun_fault``, ``planet_fault``, ``ring_fault``, each with `harmonics` harmonics.

    References
    ----------
    .. [1] P. D. McFadden and J. D. Smith, "An explanation for the asymmetry of the modulation
       sidebands about the tooth meshing frequency in epicyclic gear vibration", Proceedings of
       the Institution of Mechanical Engineers, Part C 199(1):65-70, 1985.
    """

    name: str
    sun_teeth: int
    planet_teeth: int
    ring_teeth: int
    planets: int
    sun: str
    carrier: str
    ring: str
    harmonics: int = 3
    level_db: float = 0.0
    table: ClassVar[str] = "planetary_stage"

    def __post_init__(self) -> None:
        label = self._check_common()
        for field in ("sun_teeth", "planet_teeth", "ring_teeth", "planets"):
            _set(self, field, _check_int(label, field, getattr(self, field), 1))
        for field in _PLANETARY_MEMBERS:
            _check_name(label, field, getattr(self, field))
        held = [m for m in _PLANETARY_MEMBERS if getattr(self, m) == FIXED]
        if len(held) != 1:
            shown = ", ".join(f"{m} = {_fmt(getattr(self, m))}" for m in _PLANETARY_MEMBERS)
            what = "no member is" if not held else f"{len(held)} members are"
            raise MachineFileError(
                f"{label}: {shown}: {what} \"{FIXED}\"; exactly one of sun, carrier, ring must "
                f'be "{FIXED}" (the held member) and the other two shaft names'
            )
        turning = [getattr(self, m) for m in _PLANETARY_MEMBERS if m != held[0]]
        if turning[0] == turning[1]:
            second = [m for m in _PLANETARY_MEMBERS if m != held[0]][1]
            raise _error(
                label, second, turning[1], "the two turning members must be on different shafts"
            )
        standard = self.sun_teeth + 2 * self.planet_teeth
        if self.ring_teeth != standard:
            warnings.warn(
                f"{label}: ring_teeth = {self.ring_teeth} is not sun_teeth + 2 * planet_teeth = "
                f"{standard}; kept as given (right for profile-shifted gears, otherwise check "
                "the tooth counts)",
                FoldlineWarning,
                stacklevel=3,
            )

    @property
    def held(self) -> str:
        """The held member: ``"sun"``, ``"carrier"`` or ``"ring"``."""
        return next(m for m in _PLANETARY_MEMBERS if getattr(self, m) == FIXED)

    def shafts_used(self):
        return tuple((m, getattr(self, m)) for m in _PLANETARY_MEMBERS if m != self.held)

    def _link(self) -> tuple[str, str, float, float]:
        """(member a, member b, |f_b / f_a|, sign of f_b / f_a) from the Willis equation."""
        z_s, z_r = self.sun_teeth, self.ring_teeth
        if self.held == "ring":
            return "sun", "carrier", z_s / (z_s + z_r), 1.0
        if self.held == "sun":
            return "ring", "carrier", z_r / (z_s + z_r), 1.0
        return "sun", "ring", z_s / z_r, -1.0

    def speed_links(self):
        a, b, k, _ = self._link()
        return ((getattr(self, a), getattr(self, b), k),)

    def frequencies(self, shaft_orders: Mapping[str, float]) -> PlanetaryFrequencies:
        """:func:`planetary_frequencies` of this stage at the given shaft speed magnitudes."""
        a, b, _, sign = self._link()
        signed = {self.held: 0.0, a: shaft_orders[getattr(self, a)]}
        signed[b] = sign * shaft_orders[getattr(self, b)]
        return planetary_frequencies(
            signed["sun"], signed["carrier"], signed["ring"],
            sun_teeth=self.sun_teeth, planet_teeth=self.planet_teeth,
            ring_teeth=self.ring_teeth, planets=self.planets,
        )

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """Each planetary kind with its harmonics, kind by kind."""
        freq = self.frequencies(shaft_orders)
        return tuple(
            _line(self.name, kind, h, self.level_db, order=h * getattr(freq, kind))
            for kind in _PLANETARY_KINDS
            for h in range(1, self.harmonics + 1)
        )


@dataclass(frozen=True)
class Bearing(_Entry):
    """A rolling-element bearing on a shaft.

    Parameters
    ----------
    name : str
        Entry name, e.g. ``"output NDE"``.
    shaft : str
        Shaft the rotating race turns with.
    rolling_elements : int
        Number of rolling elements N (>= 1).
    element_diameter, pitch_diameter : float
        Rolling element diameter d and pitch diameter D in the same length unit, 0 < d < D.
    contact_angle_deg : float
        Contact angle in degrees, 0 <= alpha < 90 (default 0).
    rotating_race : str
        ``"inner"`` (default: inner race on the shaft, outer race still) or ``"outer"``.
    harmonics : int
        Harmonics of each defect frequency (default 1).
    level_db : float
        Source level in dB (default 0).

    Notes
    -----
    Lines ``ftf``, ``bpfo``, ``bpfi``, ``bsf`` (see :func:`bearing_frequencies`), each with its
    harmonics, kind by kind.

    References
    ----------
    .. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A tutorial",
       Mechanical Systems and Signal Processing 25(2):485-520, 2011.
    """

    name: str
    shaft: str
    rolling_elements: int
    element_diameter: float
    pitch_diameter: float
    contact_angle_deg: float = 0.0
    rotating_race: str = "inner"
    harmonics: int = 1
    level_db: float = 0.0
    table: ClassVar[str] = "bearing"

    def __post_init__(self) -> None:
        label = self._check_common()
        _check_name(label, "shaft", self.shaft)
        count = _check_int(label, "rolling_elements", self.rolling_elements, 1)
        _set(self, "rolling_elements", count)
        for field in ("element_diameter", "pitch_diameter"):
            _set(self, field, _check_real(label, field, getattr(self, field), positive=True))
        if self.element_diameter >= self.pitch_diameter:
            raise _error(
                label, "element_diameter", self.element_diameter,
                f"must be smaller than pitch_diameter = {_fmt(self.pitch_diameter)} "
                "(same length unit)",
            )
        angle = _check_real(label, "contact_angle_deg", self.contact_angle_deg)
        if not 0.0 <= angle < 90.0:
            raise _error(
                label, "contact_angle_deg", self.contact_angle_deg, "must be >= 0 and < 90"
            )
        _set(self, "contact_angle_deg", angle)
        if self.rotating_race not in ROTATING_RACES:
            raise _error(
                label, "rotating_race", self.rotating_race,
                'must be "inner" (inner race turns with the shaft) or "outer"',
            )

    def shafts_used(self):
        return (("shaft", self.shaft),)

    def frequencies(self, shaft_orders: Mapping[str, float]) -> BearingFrequencies:
        """:func:`bearing_frequencies` of this bearing, in orders of the reference shaft."""
        f = shaft_orders[self.shaft]
        inner, outer = (f, 0.0) if self.rotating_race == "inner" else (0.0, f)
        return bearing_frequencies(
            inner, outer,
            rolling_elements=self.rolling_elements, element_diameter=self.element_diameter,
            pitch_diameter=self.pitch_diameter, contact_angle_deg=self.contact_angle_deg,
        )

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """``ftf``, ``bpfo``, ``bpfi``, ``bsf`` with their harmonics, kind by kind."""
        freq = self.frequencies(shaft_orders)
        return tuple(
            _line(self.name, kind, h, self.level_db, order=h * getattr(freq, kind))
            for kind in ("ftf", "bpfo", "bpfi", "bsf")
            for h in range(1, self.harmonics + 1)
        )


@dataclass(frozen=True)
class Rotor(_Entry):
    """A bladed or poled rotor: blades, vanes, poles... passing at `count` x shaft speed.

    Parameters
    ----------
    name : str
        Entry name, e.g. ``"cooling fan"``.
    shaft : str
        Shaft the rotor turns with.
    count : int
        Blades, vanes, poles... (>= 1).
    harmonics : int
        Harmonics of the pass frequency (default 1).
    level_db : float
        Source level in dB (default 0).
    """

    name: str
    shaft: str
    count: int
    harmonics: int = 1
    level_db: float = 0.0
    table: ClassVar[str] = "rotor"

    def __post_init__(self) -> None:
        label = self._check_common()
        _check_name(label, "shaft", self.shaft)
        _set(self, "count", _check_int(label, "count", self.count, 1))

    def shafts_used(self):
        return (("shaft", self.shaft),)

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """``rotor`` lines at ``h * count * shaft order``."""
        base = self.count * shaft_orders[self.shaft]
        return tuple(
            _line(self.name, "rotor", h, self.level_db, order=h * base)
            for h in range(1, self.harmonics + 1)
        )


@dataclass(frozen=True)
class OrderSource(_Entry):
    """Any line at a fixed multiple of a shaft's speed (written ``[[order]]`` in a machine file).

    Parameters
    ----------
    name : str
        Entry name.
    shaft : str
        Shaft whose speed the order multiplies.
    order : float
        Multiple of that shaft's speed (> 0; need not be an integer).
    harmonics : int
        Harmonics (default 1).
    level_db : float
        Source level in dB (default 0).
    """

    name: str
    shaft: str
    order: float
    harmonics: int = 1
    level_db: float = 0.0
    table: ClassVar[str] = "order"

    def __post_init__(self) -> None:
        label = self._check_common()
        _check_name(label, "shaft", self.shaft)
        _set(self, "order", _check_real(label, "order", self.order, positive=True))

    def shafts_used(self):
        return (("shaft", self.shaft),)

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """``order`` lines at ``h * order * shaft order``."""
        base = self.order * shaft_orders[self.shaft]
        return tuple(
            _line(self.name, "order", h, self.level_db, order=h * base)
            for h in range(1, self.harmonics + 1)
        )


@dataclass(frozen=True)
class FixedLine(_Entry):
    """A line at a fixed frequency, whatever the speed (written ``[[line]]`` in a machine file).

    Parameters
    ----------
    name : str
        Entry name, e.g. ``"mains"``.
    hz : float
        Frequency in Hz (> 0).
    harmonics : int
        Harmonics, at ``h * hz`` (default 1).
    level_db : float
        Source level in dB (default 0).
    """

    name: str
    hz: float
    harmonics: int = 1
    level_db: float = 0.0
    table: ClassVar[str] = "line"

    def __post_init__(self) -> None:
        label = self._check_common()
        _set(self, "hz", _check_real(label, "hz", self.hz, positive=True))

    def lines(self, shaft_orders: Mapping[str, float]) -> tuple[Line, ...]:
        """``line`` lines at ``h * hz`` (order None)."""
        return tuple(
            _line(self.name, "line", h, self.level_db, hz=h * self.hz)
            for h in range(1, self.harmonics + 1)
        )


#: Source classes in machine-file order, each with its TOML table name in ``cls.table``.
SOURCE_TYPES = (GearStage, PlanetaryStage, Bearing, Rotor, OrderSource, FixedLine)

Source = Union[GearStage, PlanetaryStage, Bearing, Rotor, OrderSource, FixedLine]


# --------------------------------------------------------------------------------------------
# Resonances and critical speeds (not line sources: they shape lines, they emit none)
# --------------------------------------------------------------------------------------------

#: Damping ratio assumed where a ``[[resonance]]`` or ``[[critical]]`` entry gives none: 0.05,
#: a lightly damped structure or rotor mode (half-power amplification factor 1 / (2 x 0.05) =
#: 10, inside the range API 684 calls sensitive; common practice, no source).
DEFAULT_DAMPING_RATIO = 0.05


def _check_damping(label: str, value) -> float | None:
    if value is None:
        return None
    zeta = _check_real(label, "damping_ratio", value, positive=True)
    if zeta >= 1 / math.sqrt(2):
        raise _error(label, "damping_ratio", value,
                     "must be > 0 and < 0.707 (an underdamped mode with a resonance peak; "
                     "typical values 0.01 to 0.2)")
    return zeta


class _Mode(_Entry):
    """Shared behaviour of resonances and criticals."""

    @property
    def zeta(self) -> float:
        """The damping ratio, or :data:`DEFAULT_DAMPING_RATIO` where none was given."""
        return DEFAULT_DAMPING_RATIO if self.damping_ratio is None else self.damping_ratio

    @property
    def amplification_factor(self) -> float:
        """Half-power amplification factor of the mode, ``1 / (2 zeta)`` (the Q factor)."""
        return 1.0 / (2.0 * self.zeta)


@dataclass(frozen=True)
class Resonance(_Mode):
    """A structural natural frequency (written ``[[resonance]]`` in a machine file).

    Parameters
    ----------
    name : str
        Entry name, e.g. ``"housing bending"``.
    hz : float
        Natural frequency in Hz (> 0).
    damping_ratio : float, optional
        Viscous damping ratio zeta, 0 < zeta < 0.707; None (the default) means unknown, and
        :data:`DEFAULT_DAMPING_RATIO` is used where a number is needed.

    Notes
    -----
    A resonance is fixed in Hz: every line whose true frequency passes ``hz`` during a run
    crosses it (see :mod:`workbench.sampling.resonance`).
    """

    name: str
    hz: float
    damping_ratio: float | None = None
    table: ClassVar[str] = "resonance"

    def __post_init__(self) -> None:
        label = self._check_common()
        _set(self, "hz", _check_real(label, "hz", self.hz, positive=True))
        _set(self, "damping_ratio", _check_damping(label, self.damping_ratio))


@dataclass(frozen=True)
class Critical(_Mode):
    """A predicted rotor critical speed of the reference shaft (``[[critical]]``).

    Parameters
    ----------
    name : str
        Entry name, e.g. ``"first bending"``.
    rpm : float
        Critical speed of the reference shaft in rev/min (> 0).
    damping_ratio : float, optional
        Viscous damping ratio of the rotor mode, 0 < zeta < 0.707; None means unknown
        (:data:`DEFAULT_DAMPING_RATIO` is used where a number is needed).

    Notes
    -----
    A critical is excited once per revolution (unbalance): order 1 crosses its natural
    frequency ``rpm / 60`` Hz exactly at ``rpm``.
    """

    name: str
    rpm: float
    damping_ratio: float | None = None
    table: ClassVar[str] = "critical"

    def __post_init__(self) -> None:
        label = self._check_common()
        _set(self, "rpm", _check_real(label, "rpm", self.rpm, positive=True))
        _set(self, "damping_ratio", _check_damping(label, self.damping_ratio))

    @property
    def hz(self) -> float:
        """The mode's natural frequency, ``rpm / 60`` Hz."""
        return self.rpm / 60.0


#: Mode classes (not sources) in machine-file order, each with its TOML table name.
MODE_TYPES = (Resonance, Critical)


# --------------------------------------------------------------------------------------------
# Machine
# --------------------------------------------------------------------------------------------


def _names(items) -> str:
    return ", ".join(f"'{x}'" for x in items)


@dataclass(frozen=True)
class Machine:
    """A drive train: shafts and the sources on them.

    Parameters
    ----------
    name : str
        Machine name.
    reference : str
        Name of the reference shaft: the shaft whose speed the profile and the tacho give.
    shafts : tuple of Shaft
        At least one; names unique.
    sources : tuple of Source
        Gear stages, planetary stages, bearings, rotors, orders and fixed lines.  Entry names
        must be unique across shafts and sources; every shaft a source names must exist.
    resonances : tuple of Resonance
        Structural natural frequencies (Hz).  Not sources: they give no line, so
        :meth:`lines` ignores them.
    criticals : tuple of Critical
        Predicted rotor critical speeds of the reference shaft (rpm).  Names of resonances and
        criticals must be unique among themselves.

    Notes
    -----
    The train itself (connection and consistency) is checked by :meth:`shaft_orders`, which
    :meth:`lines` calls; the machine file reader calls both so that errors show at load time.
    """

    name: str
    reference: str
    shafts: tuple[Shaft, ...]
    sources: tuple[Source, ...] = ()
    resonances: tuple[Resonance, ...] = ()
    criticals: tuple[Critical, ...] = ()

    def __post_init__(self) -> None:
        label = "[machine]"
        _check_name(label, "name", self.name)
        _check_name(label, "reference", self.reference)
        _set(self, "shafts", tuple(self.shafts))
        _set(self, "sources", tuple(self.sources))
        if not self.shafts:
            raise MachineFileError(f"{label} '{self.name}': no [[shaft]]; give at least one shaft")
        for item in self.shafts:
            if not isinstance(item, Shaft):
                raise MachineFileError(
                    f"{label} '{self.name}': shafts must be Shaft objects, got {item!r}"
                )
        for item in self.sources:
            if not isinstance(item, SOURCE_TYPES):
                raise MachineFileError(
                    f"{label} '{self.name}': sources must be "
                    f"{', '.join(c.__name__ for c in SOURCE_TYPES)} objects, got {item!r}"
                )
        _set(self, "resonances", tuple(self.resonances))
        _set(self, "criticals", tuple(self.criticals))
        for attr, cls in (("resonances", Resonance), ("criticals", Critical)):
            for item in getattr(self, attr):
                if not isinstance(item, cls):
                    raise MachineFileError(
                        f"{label} '{self.name}': {attr} must be {cls.__name__} objects, "
                        f"got {item!r}"
                    )
        modes: dict[str, _Entry] = {}
        for item in self.resonances + self.criticals:
            if item.name in modes:
                raise _error(
                    item.label, "name", item.name,
                    f"also used by {modes[item.name].label}; names of resonances and criticals "
                    "must be unique",
                )
            modes[item.name] = item
        seen: dict[str, _Entry] = {}
        for item in self.shafts + self.sources:
            if item.name in seen:
                raise _error(
                    item.label, "name", item.name,
                    f"also used by {seen[item.name].label}; names must be unique across shafts "
                    "and sources",
                )
            seen[item.name] = item
        shaft_names = [s.name for s in self.shafts]
        if self.reference not in shaft_names:
            raise _error(
                label, "reference", self.reference,
                f"is not a shaft; shafts are {_names(shaft_names)}"
                + _suggest(self.reference, shaft_names),
            )
        for item in self.sources:
            for field, shaft in item.shafts_used():
                if shaft not in shaft_names:
                    raise _error(
                        item.label, field, shaft,
                        f"no such [[shaft]]; shafts are {_names(shaft_names)}"
                        + _suggest(shaft, shaft_names),
                    )

    @property
    def entries(self) -> dict[str, Shaft | Source]:
        """Every shaft and source by name, shafts first, in declaration order."""
        return {item.name: item for item in self.shafts + self.sources}

    def shaft_orders(self) -> dict[str, float]:
        """Speed of each shaft as a multiple of the reference shaft speed.

        Each gear stage and planetary stage ties two shaft speeds by a ratio (parallel stage:
        ``f_driven = f_driver Z_driver / Z_driven``; planetary stage: the Willis equation with
        the held member at 0).  The train is walked breadth-first from the reference shaft.

        Returns
        -------
        dict of str to float
            Shaft name -> speed magnitude in orders, in shaft declaration order; the reference
            shaft is 1.0.

        Raises
        ------
        TrainError
            If a shaft cannot be reached from the reference shaft through the stages, or if
            two routes give a shaft speeds that differ by more than a relative 1e-9.

        References
        ----------
        .. [1] P. D. McFadden and J. D. Smith, "An explanation for the asymmetry of the
           modulation sidebands about the tooth meshing frequency in epicyclic gear
           vibration", Proc. IMechE Part C 199(1):65-70, 1985.
        """
        links: dict[str, list[tuple[str, float, _Entry]]] = {s.name: [] for s in self.shafts}
        for src in self.sources:
            for a, b, k in src.speed_links():
                links[a].append((b, k, src))
                links[b].append((a, 1.0 / k, src))
        speed = {self.reference: 1.0}
        route: dict[str, tuple[str, ...]] = {self.reference: ()}
        queue = deque([self.reference])
        while queue:
            a = queue.popleft()
            for b, k, src in links[a]:
                value = speed[a] * k
                via = route[a] + (src.name,)
                if b not in speed:
                    speed[b] = value
                    route[b] = via
                    queue.append(b)
                elif not math.isclose(speed[b], value, rel_tol=_TRAIN_RTOL):
                    raise TrainError(
                        f"[machine] '{self.name}': shaft '{b}' turns at order {speed[b]:.10g} "
                        f"through {_names(route[b]) or 'the reference'} but at order "
                        f"{value:.10g} through {_names(via)}; the entries "
                        f"{_names(dict.fromkeys(route[b] + via))} conflict (check their tooth "
                        "counts and shafts)"
                    )
        missing = [s.name for s in self.shafts if s.name not in speed]
        if missing:
            on_them = [
                src.label for src in self.sources
                if any(shaft in missing for _, shaft in src.shafts_used())
            ]
            also = f" (entries on them: {', '.join(on_them)})" if on_them else ""
            many = len(missing) > 1
            raise TrainError(
                f"[machine] '{self.name}': {'shafts' if many else 'shaft'} {_names(missing)} "
                f"{'are' if many else 'is'} not connected to the reference shaft "
                f"'{self.reference}' by any [[gear_stage]] or [[planetary_stage]]{also}; "
                f"connect {'them' if many else 'it'} with a stage or remove "
                f"{'them' if many else 'it'}"
            )
        return {s.name: speed[s.name] for s in self.shafts}

    def lines(self) -> tuple[Line, ...]:
        """Every line of the machine: shafts first, then every source, in declaration order.

        Returns
        -------
        tuple of Line
            Orders relative to the reference shaft; fixed lines carry `hz` instead.

        Raises
        ------
        TrainError
            See :meth:`shaft_orders`.
        MachineFileError
            If two entries expand to the same line name.
        """
        orders = self.shaft_orders()
        out: list[Line] = []
        seen: dict[str, Line] = {}
        for item in self.shafts + self.sources:
            try:
                item_lines = item.lines(orders)
            except InputError as exc:  # a line frequency that overflows or underflows
                raise MachineFileError(
                    f"{item.label}: {exc}; every line of an entry must have a finite positive "
                    "frequency: check the entry's numbers (order, teeth, diameters, harmonics)"
                ) from None
            for line in item_lines:
                if line.name in seen:
                    first = self.entries[seen[line.name].entry]
                    raise MachineFileError(
                        f"{item.label}: line name '{line.name}' is also a line of "
                        f"{first.label}; rename one of the entries"
                    )
                seen[line.name] = line
                out.append(line)
        return tuple(out)

    def line(self, name: str) -> Line:
        """The line called `name`.

        Raises
        ------
        MachineFileError
            If there is no such line; the message lists near matches.
        """
        lines = {line.name: line for line in self.lines()}
        if name in lines:
            return lines[name]
        close = difflib.get_close_matches(name, list(lines), n=3, cutoff=0.6)
        hint = f"; did you mean {_names(close)}?" if close else ""
        raise MachineFileError(
            f"[machine] '{self.name}': no line named '{name}'{hint} "
            f"(the machine has {len(lines)} lines; list them with Machine.lines())"
        )
