"""Layer 1, the drive train: shafts, sources, speed ratios, lines and the machine file.

Typical use::

    from workbench.machine import read_machine
    machine = read_machine("gearbox.toml")
    machine.shaft_orders()      # {"input": 1.0, "countershaft": 0.343..., ...}
    for line in machine.lines():
        print(line.name, line.order, line.hz)
"""

from workbench.machine.machinefile import (
    machine_from_dict,
    machine_to_dict,
    machine_to_toml,
    read_machine,
    write_machine,
)
from workbench.machine.model import (
    DEFAULT_DAMPING_RATIO,
    FIXED,
    KIND_NAMES,
    LINE_KINDS,
    MODE_TYPES,
    ROTATING_RACES,
    SOURCE_TYPES,
    Bearing,
    BearingFrequencies,
    Critical,
    FixedLine,
    GearStage,
    Line,
    Machine,
    OrderSource,
    PlanetaryFrequencies,
    PlanetaryStage,
    Resonance,
    Rotor,
    Shaft,
    Source,
    bearing_frequencies,
    kind_name,
    planetary_frequencies,
)

__all__ = [
    "Critical",
    "DEFAULT_DAMPING_RATIO",
    "MODE_TYPES",
    "Resonance",
    "FIXED",
    "KIND_NAMES",
    "LINE_KINDS",
    "kind_name",
    "ROTATING_RACES",
    "SOURCE_TYPES",
    "Bearing",
    "BearingFrequencies",
    "FixedLine",
    "GearStage",
    "Line",
    "Machine",
    "OrderSource",
    "PlanetaryFrequencies",
    "PlanetaryStage",
    "Rotor",
    "Shaft",
    "Source",
    "bearing_frequencies",
    "machine_from_dict",
    "machine_to_dict",
    "machine_to_toml",
    "planetary_frequencies",
    "read_machine",
    "write_machine",
]
