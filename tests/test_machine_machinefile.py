"""Tests of workbench.machine.machinefile: reading, validating and writing machine files."""

import copy
import json
import math
import re
import tomllib

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from workbench.errors import FoldlineWarning, MachineFileError, TrainError
from workbench.machine import (
    Bearing,
    FixedLine,
    GearStage,
    Machine,
    OrderSource,
    PlanetaryStage,
    Rotor,
    Shaft,
    machine_from_dict,
    machine_to_dict,
    machine_to_toml,
    read_machine,
    write_machine,
)

from builders import GEARBOX_MACHINE as DATA


def base():
    """A small valid machine dictionary (invented)."""
    return {
        "machine": {"name": "bench", "reference": "input"},
        "shaft": [{"name": "input"}, {"name": "output"}, {"name": "drum"}],
        "gear_stage": [{"name": "stage 1", "driver": "input", "driven": "output",
                        "driver_teeth": 20, "driven_teeth": 60, "sidebands": 1}],
        "planetary_stage": [{"name": "planetary", "sun_teeth": 12, "planet_teeth": 24,
                             "ring_teeth": 60, "planets": 3, "sun": "output",
                             "carrier": "drum", "ring": "fixed"}],
        "bearing": [{"name": "output NDE", "shaft": "output", "rolling_elements": 9,
                     "element_diameter": 7.9375, "pitch_diameter": 38.5}],
        "rotor": [{"name": "fan", "shaft": "input", "count": 7}],
        "order": [{"name": "slip", "shaft": "input", "order": 0.5}],
        "line": [{"name": "mains", "hz": 100.0, "harmonics": 2}],
    }


def changed(table, key, value, index=0):
    """base() with one key of one entry set (or removed when value is ...)."""
    d = base()
    entry = d[table] if table == "machine" else d[table][index]
    if value is ...:
        del entry[key]
    else:
        entry[key] = value
    return d


# ------------------------------------------------------------------------------------------
# Reading
# ------------------------------------------------------------------------------------------


def test_read_example_file():
    machine = read_machine(DATA)
    assert machine.name == "test rig gearbox"
    assert machine.reference == "input"
    orders = machine.shaft_orders()
    assert orders["countershaft"] == pytest.approx(23 / 67, rel=1e-12)  # Z1 f1 = Z2 f2
    # ring held: f_c = f_s Z_s/(Z_s + Z_r) (McFadden & Smith 1985, from memory)
    assert orders["drum"] == pytest.approx(orders["output"] * 21 / 108, rel=1e-12)
    lines = {line.name: line for line in machine.lines()}
    # Curtin geometry on the input shaft: BPFO 3.572 x (G. Forbes, Curtin data set, 2012)
    assert lines["input DE bpfo"].order == pytest.approx(3.572, rel=5e-4)
    assert lines["stage 1 mesh"].level_db == -6.0
    assert lines["output NDE bpfi x2"].level_db == -12.0
    assert lines["mains line x2"].hz == 200.0
    assert lines["motor slip order"].order == 0.5
    assert lines["cooling fan rotor"].order == 7.0
    kinds = [src.table for src in machine.sources]
    assert kinds == ["gear_stage", "gear_stage", "planetary_stage", "bearing", "bearing",
                     "rotor", "order", "line"]
    # contact angle given as TOML integer 15 -> float
    assert machine.entries["output NDE"].contact_angle_deg == 15.0


def test_machine_from_dict_defaults():
    machine = machine_from_dict(base())
    stage = machine.entries["stage 1"]
    assert (stage.harmonics, stage.sidebands, stage.level_db) == (3, 1, 0.0)
    bearing = machine.entries["output NDE"]
    assert bearing.contact_angle_deg == 0.0
    assert (bearing.rotating_race, bearing.harmonics) == ("inner", 1)
    assert machine.entries["planetary"].harmonics == 3


# ------------------------------------------------------------------------------------------
# Round trip
# ------------------------------------------------------------------------------------------


def test_round_trip_example_file(tmp_path):
    machine = read_machine(DATA)
    out = tmp_path / "copy.toml"
    write_machine(machine, out)
    again = read_machine(out)
    assert again == machine
    assert again.lines() == machine.lines()
    assert machine_from_dict(machine_to_dict(machine)) == machine
    # the written text is TOML that tomllib reads to the same dictionary
    assert tomllib.loads(out.read_text(encoding="utf-8")) == machine_to_dict(machine)


def test_round_trip_awkward_names_and_floats(tmp_path):
    machine = Machine(
        'rig "B" \\ north ü', "in \"1\"",
        (Shaft('in "1"'), Shaft("out\\2 ∑")),
        (GearStage("g'1", 'in "1"', "out\\2 ∑", 13, 17, level_db=-0.1),
         FixedLine("tone #1 = ok", 0.1 + 0.2, level_db=1e-300),
         OrderSource("o", "out\\2 ∑", 1 / 3, harmonics=4)),
    )
    path = tmp_path / "odd.toml"
    write_machine(machine, path)
    assert read_machine(path) == machine


def test_interleaved_sources_come_back_grouped(tmp_path):
    # TOML arrays of tables keep order within a table only (documented behaviour).
    shafts = (Shaft("a"),)
    r1, l1, r2 = Rotor("r1", "a", 3), FixedLine("l1", 50.0), Rotor("r2", "a", 5)
    path = tmp_path / "m.toml"
    write_machine(Machine("m", "a", shafts, (r1, l1, r2)), path)
    assert read_machine(path) == Machine("m", "a", shafts, (r1, r2, l1))


def test_write_replaces_existing_file_and_leaves_no_temporaries(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text("old", encoding="utf-8")
    machine = machine_from_dict(base())
    write_machine(machine, str(path))
    assert read_machine(path) == machine
    assert [p.name for p in tmp_path.iterdir()] == ["m.toml"]


def test_write_into_missing_folder_fails_cleanly(tmp_path):
    path = tmp_path / "no such folder" / "m.toml"
    with pytest.raises(MachineFileError, match=r"m\.toml: cannot write machine file"):
        write_machine(machine_from_dict(base()), path)


names = st.text(
    alphabet=st.characters(blacklist_categories=("Cs", "Cc", "Zl", "Zp", "Cf", "Co", "Cn")),
    min_size=1, max_size=12,
).filter(lambda s: s == s.strip() and s.isprintable())


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    names=st.lists(names, min_size=6, max_size=6, unique=True),
    teeth=st.tuples(st.integers(1, 500), st.integers(1, 500)),
    level=st.floats(-200, 200, allow_nan=False),
    hz=st.floats(1e-6, 1e9, allow_nan=False),
    order=st.floats(1e-6, 1e3, allow_nan=False),
    d=st.floats(1e-3, 10.0),
    angle=st.floats(0.0, 89.99),
    race=st.sampled_from(["inner", "outer"]),
)
def test_round_trip_property(tmp_path, names, teeth, level, hz, order, d, angle, race):
    a, b, c, e, o, f = names
    machine = Machine(
        "m " + a, a, (Shaft(a), Shaft(b)),
        (GearStage(c, a, b, *teeth, sidebands=2, level_db=level),
         Bearing(e, b, 11, d, d * 3.7, contact_angle_deg=angle, rotating_race=race),
         OrderSource(o, b, order), FixedLine(f, hz)),
    )
    text = machine_to_toml(machine)
    assert machine_from_dict(tomllib.loads(text)) == machine
    path = tmp_path / "p.toml"
    write_machine(machine, path)
    assert read_machine(path) == machine


# ------------------------------------------------------------------------------------------
# File-level errors
# ------------------------------------------------------------------------------------------


def test_missing_file_names_the_path(tmp_path):
    path = tmp_path / "absent.toml"
    with pytest.raises(MachineFileError, match=re.escape(f"{path}: machine file not found")):
        read_machine(path)


def test_directory_is_not_a_machine_file(tmp_path):
    with pytest.raises(MachineFileError, match="is a directory"):
        read_machine(tmp_path)


def test_toml_syntax_error_gives_line(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('[machine]\nname = "x"\nreference = = 3\n', encoding="utf-8")
    with pytest.raises(MachineFileError, match=r"bad\.toml: not valid TOML: .*\(at line 3, column"):
        read_machine(path)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin.toml"
    path.write_bytes('[machine]\nname = "Gebläse"\n'.encode("latin-1"))
    with pytest.raises(MachineFileError, match=r"latin\.toml: not UTF-8 text \(byte 22\)"):
        read_machine(path)


def machine_to_toml_dict(d):
    """A (possibly invalid) machine dictionary as TOML text (strings, numbers, booleans)."""
    out = []
    for table, body in d.items():
        for entry in [body] if isinstance(body, dict) else body:
            out.append(f"[{table}]" if table == "machine" else f"[[{table}]]")
            out.extend(f"{key} = {json.dumps(value)}" for key, value in entry.items())
    return "\n".join(out) + "\n"


def test_message_format_names_file_entry_field_value(tmp_path):
    d = changed("bearing", "contact_angle_deg", 95)
    path = tmp_path / "gearbox.toml"
    path.write_text(machine_to_toml_dict(d), encoding="utf-8")
    with pytest.raises(MachineFileError, match=re.escape(
            "gearbox.toml: [[bearing]] 'output NDE': contact_angle_deg = 95: "
            "must be >= 0 and < 90")):
        read_machine(path)


def test_train_errors_from_file_keep_their_class(tmp_path):
    d = base()
    d["shaft"].append({"name": "spare"})
    d["rotor"].append({"name": "spare fan", "shaft": "spare", "count": 4})
    path = tmp_path / "train.toml"
    path.write_text(machine_to_toml_dict(d), encoding="utf-8")
    with pytest.raises(TrainError, match=r"train\.toml: \[machine\] 'bench': shaft 'spare' is "
                                         r"not connected .*\[\[rotor\]\] 'spare fan'"):
        read_machine(path)


def test_conflicting_train_from_dict():
    d = base()
    d["gear_stage"].append({"name": "stage 2", "driver": "input", "driven": "drum",
                            "driver_teeth": 1, "driven_teeth": 2})
    with pytest.raises(TrainError, match=r"^<dict>: .*'drum'.*conflict"):
        machine_from_dict(d)


def test_ring_teeth_warning_names_the_file():
    d = changed("planetary_stage", "ring_teeth", 61)
    with pytest.warns(FoldlineWarning, match=r"^gb\.toml: \[\[planetary_stage\]\] 'planetary': "
                                             r"ring_teeth = 61 is not"):
        machine_from_dict(d, source="gb.toml")


def test_line_name_collision_from_dict():
    d = base()
    d["shaft"].append({"name": "b line"})
    d["gear_stage"].append({"name": "s", "driver": "input", "driven": "b line",
                            "driver_teeth": 2, "driven_teeth": 3, "sidebands": 1})
    d["line"].append({"name": "s sideband -1 b", "hz": 5.0})
    with pytest.raises(MachineFileError, match=r"^<dict>: \[\[line\]\] 's sideband -1 b': line "
                                               r"name 's sideband -1 b line' is also a line"):
        machine_from_dict(d)


# ------------------------------------------------------------------------------------------
# Every validation branch
# ------------------------------------------------------------------------------------------


def without(table):
    d = base()
    del d[table]
    return d


def with_table(table, value):
    d = base()
    d[table] = value
    return d


INVALID = [
    # structure
    ("not a dict", ["machine"], r"a machine must be a table \(dict\), got list"),
    ("unknown table", with_table("bearings", []), r"unknown table \[bearings\]; did you mean "
                                                  r"\[\[bearing\]\]\? allowed tables are"),
    ("unknown table no hint", with_table("zzz", {}), r"unknown table \[zzz\]; allowed tables"),
    ("missing machine", without("machine"), r"missing \[machine\] table"),
    ("machine array", with_table("machine", [{"name": "a", "reference": "input"}]),
     r"\[machine\] must be a single table"),
    ("bearing single table", with_table("bearing", {"name": "b"}),
     r"\[\[bearing\]\] must be an array of tables"),
    ("shaft not tables", with_table("shaft", ["input"]), r"\[\[shaft\]\] must be an array"),
    ("no shafts", with_table("shaft", []), r"no \[\[shaft\]\]; give at least one"),
    ("no shaft table", without("shaft"), r"no \[\[shaft\]\]"),
    # keys
    ("unknown key", changed("bearing", "contact_angle", 10),
     r"\[\[bearing\]\] 'output NDE': unknown key 'contact_angle'; did you mean "
     r"'contact_angle_deg'\? allowed keys are name, shaft"),
    ("unknown key no hint", changed("rotor", "colour", "red"),
     r"\[\[rotor\]\] 'fan': unknown key 'colour'; allowed keys are name, shaft, count"),
    ("unknown machine key", changed("machine", "refrence", "input"),
     r"\[machine\]: unknown key 'refrence'; did you mean 'reference'"),
    ("class attribute is no key", changed("rotor", "table", "x"), r"unknown key 'table'"),
    ("missing key", changed("gear_stage", "driven_teeth", ...),
     r"\[\[gear_stage\]\] 'stage 1': missing required key 'driven_teeth'"),
    ("missing name", changed("bearing", "name", ...),
     r"\[\[bearing\]\] #1: missing required key 'name'"),
    ("missing reference", changed("machine", "reference", ...),
     r"\[machine\]: missing required key 'reference'"),
    # types
    ("bool teeth", changed("gear_stage", "driver_teeth", True),
     r"driver_teeth = true: must be a positive integer \(got a boolean\)"),
    ("float teeth", changed("gear_stage", "driver_teeth", 20.0),
     r"driver_teeth = 20.0: must be a positive integer \(got a number\)"),
    ("string teeth", changed("gear_stage", "driven_teeth", "60"),
     r"driven_teeth = \"60\": must be a positive integer \(got a string\)"),
    ("bool level", changed("rotor", "level_db", False),
     r"\[\[rotor\]\] 'fan': level_db = false: must be a finite number \(got a boolean\)"),
    ("string diameter", changed("bearing", "pitch_diameter", "38.5"),
     r"pitch_diameter = \"38.5\": must be a positive number \(got a string\)"),
    ("array hz", changed("line", "hz", [50, 60]), r"hz = \[50, 60\]: must be a positive number "
                                                   r"\(got an array\)"),
    ("table name", changed("shaft", "name", {"a": 1}), r"\(got a table\)"),
    ("int shaft name", changed("rotor", "shaft", 1), r"shaft = 1: must be a non-empty string"),
    ("empty name", changed("order", "name", ""), r"\[\[order\]\]: name = \"\": must be a "
                                                 r"non-empty string"),
    ("padded name", changed("order", "name", "slip "), r"without leading or trailing spaces"),
    ("control char", changed("order", "name", "a\tb"), r"printable characters"),
    # counts
    ("zero teeth", changed("gear_stage", "driven_teeth", 0), r"driven_teeth = 0: must be a "
                                                             r"positive integer"),
    ("negative sun teeth", changed("planetary_stage", "sun_teeth", -12),
     r"sun_teeth = -12: must be a positive integer"),
    ("zero planet teeth", changed("planetary_stage", "planet_teeth", 0), r"planet_teeth = 0"),
    ("zero ring teeth", changed("planetary_stage", "ring_teeth", 0), r"ring_teeth = 0"),
    ("zero planets", changed("planetary_stage", "planets", 0),
     r"\[\[planetary_stage\]\] 'planetary': planets = 0: must be a positive integer"),
    ("zero balls", changed("bearing", "rolling_elements", 0), r"rolling_elements = 0: must be "
                                                              r"a positive integer"),
    ("zero blades", changed("rotor", "count", 0), r"\[\[rotor\]\] 'fan': count = 0"),
    ("harmonics 0", changed("line", "harmonics", 0), r"\[\[line\]\] 'mains': harmonics = 0: "
                                                     r"must be a positive integer"),
    ("harmonics 0 planetary", changed("planetary_stage", "harmonics", 0), r"harmonics = 0"),
    ("sidebands < 0", changed("gear_stage", "sidebands", -1),
     r"sidebands = -1: must be an integer >= 0"),
    # bearing geometry
    ("angle 90", changed("bearing", "contact_angle_deg", 90), r"contact_angle_deg = 90: must be "
                                                              r">= 0 and < 90"),
    ("angle negative", changed("bearing", "contact_angle_deg", -5.0),
     r"contact_angle_deg = -5.0: must be >= 0 and < 90"),
    ("d >= D", changed("bearing", "element_diameter", 38.5),
     r"element_diameter = 38.5: must be smaller than pitch_diameter = 38.5"),
    ("d = 0", changed("bearing", "element_diameter", 0), r"element_diameter = 0: must be a "
                                                         r"positive number \(> 0\)"),
    ("D < 0", changed("bearing", "pitch_diameter", -38.5), r"pitch_diameter = -38.5: must be a "
                                                           r"positive number"),
    ("race", changed("bearing", "rotating_race", "middle"),
     r"rotating_race = \"middle\": must be \"inner\" .* or \"outer\""),
    # references and names
    ("unknown shaft", changed("bearing", "shaft", "outptu"),
     r"\[\[bearing\]\] 'output NDE': shaft = \"outptu\": no such \[\[shaft\]\]; shafts are "
     r"'input', 'output', 'drum'; did you mean \"output\"\?"),
    ("unknown driver", changed("gear_stage", "driver", "motor"), r"driver = \"motor\": no such"),
    ("unknown sun", changed("planetary_stage", "sun", "sunny"), r"sun = \"sunny\": no such"),
    ("reference", changed("machine", "reference", "motor"),
     r"\[machine\]: reference = \"motor\": is not a shaft; shafts are 'input', 'output', 'drum'"),
    ("duplicate shaft", with_table("shaft", [{"name": "input"}, {"name": "input"}]),
     r"\[\[shaft\]\] 'input': name = \"input\": also used by \[\[shaft\]\] 'input'"),
    ("duplicate entry", changed("order", "name", "fan"),
     r"\[\[order\]\] 'fan': name = \"fan\": also used by \[\[rotor\]\] 'fan'"),
    ("entry named like shaft", changed("line", "name", "drum"), r"also used by \[\[shaft\]\]"),
    ("fixed shaft", with_table("shaft", [{"name": "input"}, {"name": "fixed"}]),
     r"\[\[shaft\]\] 'fixed': name = \"fixed\": \"fixed\" is reserved"),
    ("same shaft gear", changed("gear_stage", "driven", "input"),
     r"driven = \"input\": must be a different shaft from driver"),
    # planetary members
    ("no member fixed", changed("planetary_stage", "ring", "input"),
     r"\[\[planetary_stage\]\] 'planetary': sun = \"output\", carrier = \"drum\", ring = "
     r"\"input\": no member is \"fixed\"; exactly one"),
    ("two fixed", changed("planetary_stage", "carrier", "fixed"), r"2 members are \"fixed\""),
    ("same turning shaft", changed("planetary_stage", "carrier", "output"),
     r"carrier = \"output\": the two turning members must be on different shafts"),
    # values
    ("hz 0", changed("line", "hz", 0), r"\[\[line\]\] 'mains': hz = 0: must be a positive number"),
    ("hz negative", changed("line", "hz", -50.0), r"hz = -50.0: must be a positive number"),
    ("hz inf", changed("line", "hz", math.inf), r"hz = inf: must be a positive number \(not inf"),
    ("order 0", changed("order", "order", 0.0), r"\[\[order\]\] 'slip': order = 0.0: must be a "
                                                r"positive number"),
    ("level nan", changed("gear_stage", "level_db", math.nan),
     r"level_db = nan: must be a finite number \(not inf or nan\)"),
    ("level inf", changed("bearing", "level_db", -math.inf), r"level_db = -inf: must be a finite"),
]


@pytest.mark.parametrize("case, d, match", INVALID, ids=[c[0] for c in INVALID])
def test_validation_branches(case, d, match):
    with pytest.raises(MachineFileError, match=match) as info:
        machine_from_dict(d, source="gearbox.toml")
    assert str(info.value).startswith("gearbox.toml: ")  # the file is named first


def test_dict_input_is_not_mutated():
    d = base()
    before = copy.deepcopy(d)
    machine_from_dict(d)
    assert d == before


def test_objects_built_match_direct_construction():
    machine = machine_from_dict(base())
    assert machine.sources == (
        GearStage("stage 1", "input", "output", 20, 60, sidebands=1),
        PlanetaryStage("planetary", 12, 24, 60, 3, sun="output", carrier="drum", ring="fixed"),
        Bearing("output NDE", "output", 9, 7.9375, 38.5),
        Rotor("fan", "input", 7),
        OrderSource("slip", "input", 0.5),
        FixedLine("mains", 100.0, harmonics=2),
    )
