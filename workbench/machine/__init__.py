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
from workbench.machine.entries import (
    DEFAULT_DAMPING_RATIO,
    FIXED,
    MODE_TYPES,
    ROTATING_RACES,
    SOURCE_TYPES,
    Bearing,
    Critical,
    FixedLine,
    GearStage,
    OrderSource,
    PlanetaryStage,
    Resonance,
    Rotor,
    Shaft,
    Source,
)
from workbench.machine.kinematics import (
    BearingFrequencies,
    PlanetaryFrequencies,
    bearing_frequencies,
    planetary_frequencies,
)
from workbench.machine.lines import KIND_NAMES, LINE_KINDS, Line, kind_name
from workbench.machine.machine import Machine

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
