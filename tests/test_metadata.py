"""Test metadata in the run sidecar: validated, written back unchanged, overridden by --meta.

Expected values: the values written (a round trip must return them exactly); ISO 8601 dates
(ISO 8601-1:2019 calendar date YYYY-MM-DD, as Python's datetime.date.fromisoformat reads them).
"""

from __future__ import annotations

import json

import pytest

from workbench.errors import InputError, RunFileError
from workbench.runs import SensorInfo, TestMetadata, read_sidecar, sidecar_from_dict, write_sidecar
from workbench.runs.metadata import parse_meta_options

SIDE = {
    "rate_hz": 2560,
    "channels": [{"name": "vib", "unit": "g", "sensitivity": 1.0, "position": "pump NDE",
                  "direction": "axial", "sensor_type": "accelerometer 100 mV/g"},
                 {"name": "tacho", "unit": "V", "sensitivity": 1.0}],
    "tacho_channel": "tacho",
    "unit_under_test": "pump P-101", "serial_number": "SN 77-1", "test_id": "SAT-4",
    "operator": "M. Duarte", "date": "2026-11-30T14:05",
}


def test_sidecar_metadata_round_trip(tmp_path):
    side = sidecar_from_dict(SIDE)
    meta = side.metadata
    assert (meta.unit_under_test, meta.serial_number, meta.test_id, meta.operator, meta.date) == (
        "pump P-101", "SN 77-1", "SAT-4", "M. Duarte", "2026-11-30T14:05")
    assert meta.sensor("vib") == SensorInfo("vib", "pump NDE", "axial", "accelerometer 100 mV/g")
    assert meta.sensor("tacho").empty
    path = write_sidecar(side, tmp_path / "run.json")
    assert json.loads(path.read_text())["channels"][0]["position"] == "pump NDE"
    assert read_sidecar(path).metadata == meta


@pytest.mark.parametrize("change, words", [
    ({"date": "30.11.2026"}, 'date = "30.11.2026": is not a date; allowed: an ISO 8601 date'),
    ({"operator": 7}, "operator = 7: must be a text in quotes"),
    ({"serial": "x"}, "unknown key 'serial'"),
    ({"channels": [{"name": "vib", "positon": "x"}]}, "unknown key 'positon' (did you mean 'position'?)"),
    ({"channels": [{"name": "vib", "direction": ["x"]}]}, 'channels[1]: direction = ["x"]: must be a text in quotes'),
])
def test_sidecar_metadata_errors_name_the_field(change, words):
    d = dict(SIDE, **change)
    if "channels" in change:
        d.pop("tacho_channel")
    with pytest.raises(RunFileError) as err:
        sidecar_from_dict(d, "run.json")
    assert str(err.value).startswith("run.json") and words in str(err.value), str(err.value)


def test_meta_overrides_add_and_replace():
    meta = sidecar_from_dict(SIDE).metadata
    pairs = parse_meta_options(["operator=A. Test", "vib.position=pump DE",
                                "tacho.sensor_type=laser tacho", "date=2026-12-01"])
    new = meta.with_overrides(pairs, channels=("vib", "tacho"))
    assert new.operator == "A. Test" and new.date == "2026-12-01"
    assert new.sensor("vib").position == "pump DE" and new.sensor("vib").direction == "axial"
    assert new.sensor("tacho").sensor_type == "laser tacho"
    assert meta.operator == "M. Duarte"  # the original is unchanged (frozen)
    with pytest.raises(InputError, match="unknown key"):
        meta.with_overrides([("serial", "x")])
    with pytest.raises(InputError, match="no channel named 'vibe'"):
        meta.with_overrides([("vibe.position", "x")], channels=("vib", "tacho"))
    with pytest.raises(InputError, match="give KEY=VALUE"):
        parse_meta_options(["operator"])
    assert TestMetadata().empty
