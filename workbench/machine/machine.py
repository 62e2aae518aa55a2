"""The machine: :class:`Machine`, its shafts and sources, and the speed ratios of the train.

A :class:`Machine` holds shafts and sources (gear stages, planetary stages, bearings, rotors,
orders and fixed lines).  :meth:`Machine.shaft_orders` walks the train from the reference shaft
and gives each shaft's speed as a multiple of the reference speed; :meth:`Machine.lines` expands
every source into :class:`~workbench.machine.lines.Line` objects, one frequency track each, with
orders relative to the reference shaft.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass

from workbench.errors import InputError, MachineFileError, TrainError
from workbench.checks import close_names, suggest
from workbench.machine._fields import _check_name, _error, _set
from workbench.machine.entries import (SOURCE_TYPES, Critical, Resonance, Shaft, Source,
                                       _Entry)
from workbench.machine.lines import Line

__all__ = [
    "Machine",
]

# Relative tolerance for two routes through the train giving one shaft the same speed.
_TRAIN_RTOL = 1e-9


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
                + suggest(self.reference, shaft_names),
            )
        for item in self.sources:
            for field, shaft in item.shafts_used():
                if shaft not in shaft_names:
                    raise _error(
                        item.label, field, shaft,
                        f"no such [[shaft]]; shafts are {_names(shaft_names)}"
                        + suggest(shaft, shaft_names),
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
        close = close_names(name, lines, n=3)
        hint = f"; did you mean {_names(close)}?" if close else ""
        raise MachineFileError(
            f"[machine] '{self.name}': no line named '{name}'{hint} "
            f"(the machine has {len(lines)} lines; list them with Machine.lines())"
        )
