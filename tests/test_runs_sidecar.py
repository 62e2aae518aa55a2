"""Tests of workbench.runs.sidecar: reading, validating and writing the JSON sidecar."""

from __future__ import annotations

import json
import os

import pytest

from workbench.errors import OutputExistsError, RunFileError
from workbench.runs.run import Channel
from workbench.runs.sidecar import (Sidecar, read_sidecar, resolve_inside, sidecar_from_dict,
                                    sidecar_path, write_sidecar)

GOOD = {
    "rate_hz": 12800,
    "channels": [{"name": "vibration", "unit": "m/s^2", "sensitivity": 0.5},
                 {"name": "tacho", "unit": "V"}],
    "tacho_channel": "tacho",
    "pulses_per_rev": 60,
    "missing_pulses": 2,
    "machine_file": "gearbox.toml",
    "notes": {"operator": "A", "list": [1, 2]},
}


def _write(folder, obj, name="run.json"):
    p = folder / name
    p.write_text(json.dumps(obj) if not isinstance(obj, str) else obj)
    return p


def test_read_good_sidecar(tmp_path):
    (tmp_path / "gearbox.toml").write_text("")
    s = read_sidecar(_write(tmp_path, GOOD))
    assert s.rate_hz == 12800.0
    assert s.channels == (Channel("vibration", "m/s^2", 0.5), Channel("tacho", "V", 1.0))
    assert s.tacho_channel == "tacho" and s.pulses_per_rev == 60 and s.missing_pulses == 2
    assert s.machine_path == (tmp_path / "gearbox.toml").resolve()
    assert s.notes == {"operator": "A", "list": [1, 2]}


def test_every_key_is_optional(tmp_path):
    s = read_sidecar(_write(tmp_path, {}))
    assert s == Sidecar(source=str(tmp_path / "run.json"))
    assert s.machine_path is None


def test_round_trip(tmp_path):
    s = sidecar_from_dict(GOOD)
    out = write_sidecar(s, tmp_path / "r.json")
    back = read_sidecar(out)
    assert back.to_dict() == s.to_dict()
    assert json.loads(out.read_text())["channels"][1] == {"name": "tacho", "unit": "V",
                                                           "sensitivity": 1.0}
    with pytest.raises(OutputExistsError, match="pass --force"):
        write_sidecar(s, out)
    write_sidecar(s, out, force=True)


def test_sidecar_path():
    assert str(sidecar_path("/a/b/run.wav")) == "/a/b/run.json"


@pytest.mark.parametrize(
    ("obj", "match"),
    [
        ({"pulse_per_rev": 2}, r"unknown key 'pulse_per_rev' \(did you mean 'pulses_per_rev'\?\)"),
        ({"colour": 2}, r"unknown key 'colour'; allowed: rate_hz"),
        ({"channels": [{"name": "a", "units": "g"}]}, r"channels\[1\]: unknown key 'units' "
                                                      r"\(did you mean 'unit'\?\)"),
        ([1, 2], "must hold a JSON object, not list"),
        ({"rate_hz": -1}, r"run\.json: rate_hz = -1: must be a positive, finite sample rate \(Hz\)$"),
        ({"rate_hz": "12800"}, r'rate_hz = "12800": must be a positive'),
        ({"rate_hz": True}, "rate_hz = true: must be"),
        ({"channels": {"name": "a"}}, "channels = .*: must be a list"),
        ({"channels": ["a"]}, r'channels\[1\] = "a": must be an object'),
        ({"channels": [{"unit": "g"}]}, r"channels\[1\]: 'name' is missing"),
        ({"channels": [{"name": ""}]}, r'channels\[1\]: name = "": must be a non-empty string'),
        ({"channels": [{"name": "a", "unit": 5}]}, r"unit = 5: must be a string"),
        ({"channels": [{"name": "a", "sensitivity": 0}]}, r"sensitivity = 0: must be a positive number"),
        ({"channels": [{"name": "a"}, {"name": "a"}]}, "names must be unique; repeated: a"),
        ({"pulses_per_rev": 0}, "pulses_per_rev = 0: must be a positive integer"),
        ({"pulses_per_rev": 1.5}, "pulses_per_rev = 1.5: must be"),
        ({"pulses_per_rev": True}, "pulses_per_rev = true: must be"),
        ({"pulses_per_rev": 60, "missing_pulses": 60}, "missing_pulses = 60: must be an integer from 0 to 59"),
        ({"missing_pulses": -1}, "missing_pulses = -1: must be"),
        ({"channels": [{"name": "a"}], "tacho_channel": "b"}, r'tacho_channel = "b": is not one '
                                                              r"of the channels \(a\)"),
        ({"channels": [{"name": "a"}], "tacho_channel": 2}, "tacho_channel = 2: must be an integer "
                                                            "from 1 to 1"),
        ({"tacho_channel": 0}, "tacho_channel = 0: must be"),
        ({"tacho_channel": "0"}, "tacho_channel = 0: must be"),
        ({"tacho_channel": False}, "tacho_channel = false: must be"),
        ({"tacho_channel": ""}, "tacho_channel = \"\": must be"),
        ({"machine_file": 3}, "machine_file = 3: must be a file name"),
        ({"machine_file": "/etc/machine.toml"}, "is an absolute path"),
        ({"machine_file": "C:\\m\\machine.toml"}, "is an absolute path"),
        ({"machine_file": "~/machine.toml"}, "is an absolute path"),
        ({"machine_file": "../machine.toml"}, r"leads out of the sidecar's folder \('\.\.'\)"),
        ({"machine_file": "sub/../../machine.toml"}, "leads out"),
        ({"machine_file": "sub\\..\\..\\machine.toml"}, "leads out"),
    ],
)
def test_validation(tmp_path, obj, match):
    with pytest.raises(RunFileError, match=match):
        read_sidecar(_write(tmp_path, obj))


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ('{"rate_hz": 1,\n "channels": [}', r"line 2, column 15: not valid JSON"),
        ('{"rate_hz": 1, "rate_hz": 2}', "key 'rate_hz' appears twice"),
    ],
)
def test_bad_json(tmp_path, text, match):
    with pytest.raises(RunFileError, match=match):
        read_sidecar(_write(tmp_path, text))


def test_unreadable(tmp_path):
    with pytest.raises(RunFileError, match="cannot be read"):
        read_sidecar(tmp_path / "missing.json")
    p = tmp_path / "bin.json"
    p.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(RunFileError, match="UTF-8"):
        read_sidecar(p)


def test_symlink_escape_refused(tmp_path):
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "m.toml").write_text("")
    run_dir = tmp_path / "runs"
    run_dir.mkdir()
    os.symlink(outside, run_dir / "link")
    with pytest.raises(RunFileError, match="through a symbolic link, outside the sidecar's"):
        read_sidecar(_write(run_dir, {"machine_file": "link/m.toml"}))
    os.symlink(outside / "m.toml", run_dir / "m.toml")
    with pytest.raises(RunFileError, match="symbolic link"):
        read_sidecar(_write(run_dir, {"machine_file": "m.toml"}))


def test_symlink_inside_folder_and_subfolder_allowed(tmp_path):
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "m.toml").write_text("")
    os.symlink(tmp_path / "sub" / "m.toml", tmp_path / "alias.toml")
    s = read_sidecar(_write(tmp_path, {"machine_file": "alias.toml"}))
    assert s.machine_path == (tmp_path / "sub" / "m.toml").resolve()
    s = read_sidecar(_write(tmp_path, {"machine_file": "sub/m.toml"}))
    assert s.machine_path == (tmp_path / "sub" / "m.toml").resolve()
    assert resolve_inside(tmp_path, "./sub/m.toml", "x") == (tmp_path / "sub/m.toml").resolve()


def test_write_refuses_escape_and_non_json_notes(tmp_path):
    with pytest.raises(RunFileError, match="leads out"):
        write_sidecar(Sidecar(machine_file="../m.toml"), tmp_path / "a.json")
    with pytest.raises(RunFileError, match="notes cannot be written as JSON"):
        write_sidecar(Sidecar(notes={1, 2}), tmp_path / "a.json")
    with pytest.raises(RunFileError, match="notes cannot be written as JSON"):
        write_sidecar(Sidecar(notes=float("nan")), tmp_path / "a.json")
    assert list(tmp_path.iterdir()) == []
