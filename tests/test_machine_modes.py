"""Machine-file [[resonance]] and [[critical]] entries: round trip and bad-input messages."""

import pytest

from workbench.errors import MachineFileError
from workbench.machine import (DEFAULT_DAMPING_RATIO, Critical, Machine, Resonance, Shaft,
                               machine_from_dict, read_machine, write_machine)


def base():
    return {
        "machine": {"name": "rig", "reference": "rotor"},
        "shaft": [{"name": "rotor"}],
        "order": [{"name": "unbalance", "shaft": "rotor", "order": 1.0}],
        "resonance": [{"name": "frame", "hz": 24.5, "damping_ratio": 0.02},
                      {"name": "housing", "hz": 700.0}],
        "critical": [{"name": "first bending", "rpm": 1500, "damping_ratio": 0.05}],
    }


def test_entries_are_read_and_lines_unchanged():
    m = machine_from_dict(base())
    assert m.resonances == (Resonance("frame", 24.5, 0.02), Resonance("housing", 700.0))
    assert m.criticals == (Critical("first bending", 1500.0, 0.05),)
    # Not line sources: the lines are those of the same machine without them.
    plain = {k: v for k, v in base().items() if k not in ("resonance", "critical")}
    assert machine_from_dict(plain).lines() == m.lines()
    # No damping given: the documented default is used where a number is needed.
    assert m.resonances[1].damping_ratio is None
    assert m.resonances[1].zeta == DEFAULT_DAMPING_RATIO
    # Half-power amplification factor of a single mode is Q = 1 / (2 zeta) (Rao, Mechanical
    # Vibrations, 5th ed., section 3.4).
    assert m.criticals[0].amplification_factor == pytest.approx(10.0)
    assert m.criticals[0].hz == pytest.approx(25.0)


def test_round_trip_through_a_file(tmp_path):
    m = machine_from_dict(base())
    path = tmp_path / "rig.toml"
    write_machine(m, path)
    back = read_machine(path)
    assert back == m
    text = path.read_text()
    assert "[[resonance]]" in text and "[[critical]]" in text
    # an unknown damping is not written (None has no TOML form)
    housing = text.split('name = "housing"')[1].split("[[")[0]
    assert "damping_ratio" not in housing


@pytest.mark.parametrize(
    "table, entry, match",
    [
        ("resonance", {"name": "frame", "hz": -3.0}, r"\[\[resonance\]\] 'frame': hz = -3.0: must be a positive"),
        ("resonance", {"name": "frame", "hz": "fast"}, r"hz = \"fast\": must be a positive number \(got a string\)"),
        ("resonance", {"name": "frame", "hz": 20.0, "damping_ratio": 0.9},
         r"damping_ratio = 0.9: must be > 0 and < 0.707"),
        ("resonance", {"name": "frame", "hz": 20.0, "damping_ratio": 0.0},
         r"damping_ratio = 0.0: must be a positive number"),
        ("resonance", {"name": "frame", "hz": 20.0, "dampingratio": 0.1},
         r"\[\[resonance\]\] 'frame': unknown key 'dampingratio'; did you mean 'damping_ratio'"),
        ("resonance", {"name": "frame"}, r"\[\[resonance\]\] 'frame': missing required key 'hz'"),
        ("critical", {"name": "first", "rpm": float("inf")}, r"\[\[critical\]\] 'first': rpm = inf"),
        ("critical", {"name": "first", "speed": 1500}, r"unknown key 'speed'"),
    ],
)
def test_bad_entries_name_file_entry_and_field(table, entry, match):
    d = base()
    d[table] = [entry]
    with pytest.raises(MachineFileError, match=match) as err:
        machine_from_dict(d, source="rig.toml")
    assert str(err.value).startswith("rig.toml: ")


def test_names_must_be_unique_among_modes():
    d = base()
    d["critical"] = [{"name": "frame", "rpm": 1500}]
    with pytest.raises(MachineFileError, match=r"\[\[critical\]\] 'frame': name = \"frame\": also used by "
                                               r"\[\[resonance\]\] 'frame'"):
        machine_from_dict(d, source="rig.toml")


def test_machine_refuses_wrong_objects():
    with pytest.raises(MachineFileError, match="resonances must be Resonance objects"):
        Machine("m", "a", (Shaft("a"),), resonances=(Critical("c", 100.0),))
