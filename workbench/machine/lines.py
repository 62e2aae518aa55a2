"""Lines: one frequency track of a machine (:class:`Line`), its kinds and their readable names.

A source of the drive train expands into :class:`Line` objects, each a harmonic, a sideband or
a defect order, with its order relative to the reference shaft (or a fixed frequency in Hz).
``LINE_KINDS`` lists every ``Line.kind``; :func:`kind_name` reads one for legends and tables.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench.checks import describe, show
from workbench.errors import InputError
from workbench.machine._fields import _check_int, _check_real, _set

__all__ = [
    "LINE_KINDS",
    "KIND_NAMES",
    "kind_name",
    "Line",
]

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
            raise InputError(describe("line name", self.name, "must be a non-empty string"))
        if self.kind not in LINE_KINDS:
            raise InputError(f"{label}: " + describe("kind", self.kind, "must be one of "
                                                     + ", ".join(LINE_KINDS)))
        _set(self, "harmonic", _check_int(label, "harmonic", self.harmonic, 1, cls=InputError))
        if (self.order is None) == (self.hz is None):
            raise InputError(
                f"{label}: order = {show(self.order)}, hz = {show(self.hz)}: give exactly one of "
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
