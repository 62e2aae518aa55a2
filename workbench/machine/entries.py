"""Entries of a machine: shafts, line sources, resonances and critical speeds.

Shafts (:class:`Shaft`) and the sources on them (:class:`GearStage`, :class:`PlanetaryStage`,
:class:`Bearing`, :class:`Rotor`, :class:`OrderSource`, :class:`FixedLine`), each expanding
into :class:`~workbench.machine.lines.Line` objects; the modes (:class:`Resonance`,
:class:`Critical`) shape lines and emit none.  Speeds are unit-free multiples (orders) unless a
name says otherwise.

Every constructor validates its fields and raises :class:`~workbench.errors.MachineFileError`
with a message naming the entry, the field, the bad value and what is allowed.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from typing import ClassVar, Union

from workbench.errors import FoldlineWarning, MachineFileError
from workbench.checks import show
from workbench.machine._fields import _check_int, _check_name, _check_real, _error, _set
from workbench.machine.kinematics import (BearingFrequencies, PlanetaryFrequencies,
                                          bearing_frequencies, planetary_frequencies)
from workbench.machine.lines import Line, _line

__all__ = [
    "FIXED",
    "ROTATING_RACES",
    "MODE_TYPES",
    "SOURCE_TYPES",
    "DEFAULT_DAMPING_RATIO",
    "Shaft",
    "GearStage",
    "PlanetaryStage",
    "Bearing",
    "Rotor",
    "OrderSource",
    "FixedLine",
    "Source",
    "Resonance",
    "Critical",
]

#: Word that marks the member of a planetary stage held still (sun, carrier or ring).
FIXED = "fixed"

#: Allowed values of :attr:`Bearing.rotating_race`.
ROTATING_RACES = ("inner", "outer")

# Upper limits of the expansion counts: each harmonic (and each sideband pair) is one more line
# object per source, so a typo such as harmonics = 100000000 would otherwise exhaust memory.
MAX_HARMONICS = 1000
MAX_SIDEBANDS = 100


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
            shown = ", ".join(f"{m} = {show(getattr(self, m))}" for m in _PLANETARY_MEMBERS)
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
                f"must be smaller than pitch_diameter = {show(self.pitch_diameter)} "
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
