"""Nothing is lost: inputs are never modified, outputs appear whole or not at all, existing
outputs are kept unless replacing them was asked for, data files are read as data only, and
sidecar paths stay inside the sidecar's folder.
"""

from __future__ import annotations

import ast
import hashlib
import io
import json
import os
import pickle
from pathlib import Path

import numpy as np
import pytest

import workbench
from workbench.cli import main
from workbench.errors import FoldlineError, OutputExistsError, PlanFileError, RunFileError
from workbench.machine import read_machine
from workbench.runs import (Run, WavWriter, atomic_output, read_run, read_sidecar,
                            simulate_to_wav, write_run)
from workbench.sampling import read_plan

from builders import RIG_MACHINE, RIG_PLAN

MACHINE = RIG_MACHINE.read_text()
PLAN = RIG_PLAN.read_text()


def digest(folder: Path) -> dict:
    """sha256 and mtime of every file below ``folder``."""
    return {str(p.relative_to(folder)): (hashlib.sha256(p.read_bytes()).hexdigest(),
                                         p.stat().st_mtime_ns)
            for p in sorted(folder.rglob("*")) if p.is_file()}


def stray(folder: Path) -> list:
    """Temporary files left behind (atomic_output names them '.<name>.<random>.tmp')."""
    return [p.name for p in folder.rglob("*") if p.name.endswith(".tmp")]


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """A folder with a machine file, a plan file and a short simulated run (WAV + sidecar)."""
    folder = tmp_path_factory.mktemp("inputs")
    (folder / "m.toml").write_text(MACHINE)
    (folder / "p.toml").write_text(PLAN)
    machine, plan = read_machine(folder / "m.toml"), read_plan(folder / "p.toml")
    simulate_to_wav(machine, plan, 2560, folder / "run.wav", seed=1, machine_file=folder / "m.toml")
    return folder


VERBS = {
    "alias": ["alias", "100", "3000", "--rate", "2560", "--plan", "p.toml", "--json"],
    "orders": ["orders", "m.toml", "--json"],
    "foldmap": ["foldmap", "m.toml", "p.toml", "--rate", "2560", "--png", "OUT/fold.png",
                "--json"],
    "plan": ["plan", "m.toml", "p.toml", "--json"],
    "simulate": ["simulate", "m.toml", "p.toml", "--rate", "2560", "--duration", "1", "--out",
                 "OUT/sim.wav", "--json"],
    "track": ["track", "run.wav", "--out", "OUT/track", "--json"],
    "extract": ["extract", "run.wav", "--orders", "1,2", "--out", "OUT/extract", "--json"],
    "speed": ["speed", "run.wav", "--out", "OUT/speed.csv", "--json"],
    "compare": ["compare", "run.wav", "run.wav", "--out", "OUT/compare", "--json"],
}


@pytest.mark.parametrize("verb", list(VERBS))
def test_verb_leaves_its_inputs_untouched(verb, inputs, tmp_path, monkeypatch, capsys):
    out = tmp_path / "out"
    out.mkdir()
    monkeypatch.chdir(inputs)
    before = digest(inputs)
    argv = [a.replace("OUT", str(out)) for a in VERBS[verb]]
    assert main(argv) == 0, capsys.readouterr().err
    json.loads(capsys.readouterr().out)  # one JSON object
    assert digest(inputs) == before  # same bytes, not even rewritten in place
    assert stray(inputs) == [] and stray(out) == []


def test_existing_outputs_are_kept_without_force(inputs, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(inputs)
    (tmp_path / "sim.wav").write_bytes(b"old recording")
    (tmp_path / "track").mkdir()
    (tmp_path / "track" / "order_spectrum.csv").write_text("old table")
    before = digest(tmp_path)
    sim = ["simulate", "m.toml", "p.toml", "--rate", "2560", "--duration", "1", "--out",
           str(tmp_path / "sim.wav")]
    assert main(sim) == 2
    assert main(["track", "run.wav", "--out", str(tmp_path / "track")]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 2 and all("exists already; pass --force" in e for e in err)
    assert digest(tmp_path) == before
    # Asked for, the files are replaced.
    assert main(sim + ["--force"]) == 0
    assert (tmp_path / "sim.wav").read_bytes()[:4] == b"RIFF"
    assert main(["track", "run.wav", "--out", str(tmp_path / "track"), "--force"]) == 0
    assert (tmp_path / "track" / "order_spectrum.csv").read_text().startswith("order,")
    assert stray(tmp_path) == []


# ------------------------------------------------------------------------------------------
# Interrupted writes leave nothing
# ------------------------------------------------------------------------------------------
class PowerCut(Exception):
    pass


def test_atomic_output_body_failure_leaves_nothing(tmp_path):
    target = tmp_path / "table.csv"
    with pytest.raises(PowerCut):
        with atomic_output(target) as tmp:
            tmp.write_text("half a ta")
            raise PowerCut
    assert list(tmp_path.iterdir()) == []


def test_atomic_output_keeps_the_old_file_when_replacing_fails(tmp_path):
    target = tmp_path / "table.csv"
    target.write_text("the old, complete table")
    with pytest.raises(KeyboardInterrupt):
        with atomic_output(target, force=True) as tmp:
            tmp.write_text("half of the new")
            raise KeyboardInterrupt
    assert target.read_text() == "the old, complete table"
    assert [p.name for p in tmp_path.iterdir()] == ["table.csv"]


def test_wav_writer_crash_mid_write_leaves_no_file(tmp_path, monkeypatch):
    calls = []
    real_write = WavWriter.write

    def write_then_fail(self, chunk):
        calls.append(1)
        if len(calls) == 3:
            raise PowerCut("disk unplugged")
        real_write(self, chunk)

    monkeypatch.setattr(WavWriter, "write", write_then_fail)
    run = Run(np.zeros((2, 5 * 65536)), 1000.0, ["a", "b"])
    with pytest.raises(PowerCut):
        write_run(run, tmp_path / "run.wav")
    assert len(calls) == 3
    assert list(tmp_path.iterdir()) == []  # neither the WAV, nor the sidecar, nor a temp file


def test_simulation_crash_mid_write_leaves_no_file(inputs, tmp_path, monkeypatch):
    import workbench.runs.simulate as sim

    real = sim._generate

    def generate_then_fail(*args, **kwargs):
        gen = real(*args, **kwargs)
        yield next(gen)
        raise PowerCut("killed")

    monkeypatch.setattr(sim, "_generate", generate_then_fail)
    machine, plan = read_machine(inputs / "m.toml"), read_plan(inputs / "p.toml")
    with pytest.raises(PowerCut):
        simulate_to_wav(machine, plan, 2560, tmp_path / "sim.wav", chunk_s=0.5)
    assert list(tmp_path.iterdir()) == []


def test_figure_write_failure_through_the_command_leaves_no_file(inputs, tmp_path,
                                                                 monkeypatch, capsys):
    import workbench.plots.common as common

    def half_then_fail(self, data):
        with open(self, "wb") as f:
            f.write(data[: len(data) // 2])
        raise PowerCut("no space left")

    monkeypatch.setattr(common.Path, "write_bytes", half_then_fail)
    monkeypatch.chdir(inputs)
    monkeypatch.setenv("FOLDLINE_DEBUG", "1")  # let the failure through instead of exit 1
    with pytest.raises(PowerCut):
        main(["foldmap", "m.toml", "p.toml", "--rate", "2560", "--png", str(tmp_path / "f.png")])
    assert list(tmp_path.iterdir()) == []


def test_data_bad_midway_through_a_wav_leaves_no_file(tmp_path):
    data = np.zeros((1, 3 * 65536))
    data[0, 2 * 65536 + 5] = np.nan  # found only when the third chunk is written
    with pytest.raises(FoldlineError, match="non-finite value"):
        write_run(Run(data, 1000.0, ["x"]), tmp_path / "x.wav")
    assert list(tmp_path.iterdir()) == []


# ------------------------------------------------------------------------------------------
# Data files are data
# ------------------------------------------------------------------------------------------
class _Marker:
    """Unpickling this would create a file: proof that pickled data ran code."""

    def __init__(self, path):
        self.path = path

    def __reduce__(self):
        return (Path.touch, (Path(self.path),))


def test_npz_with_pickled_object_is_refused_without_running_it(tmp_path):
    marker = tmp_path / "pwned"
    buf = io.BytesIO()
    np.savez(buf, data=np.array([_Marker(str(marker)), 1.0], dtype=object), rate_hz=1000.0)
    (tmp_path / "run.npz").write_bytes(buf.getvalue())
    with pytest.raises(RunFileError, match="pickled object array; refused"):
        read_run(tmp_path / "run.npz")
    assert not marker.exists()


def test_npz_pickled_channel_names_are_refused(tmp_path):
    marker = tmp_path / "pwned"
    np.savez(tmp_path / "run.npz", data=np.zeros((1, 100)), rate_hz=1000.0,
             channel_names=np.array([_Marker(str(marker))], dtype=object))
    with pytest.raises(RunFileError, match="'channel_names' holds a pickled object array"):
        read_run(tmp_path / "run.npz")
    assert not marker.exists()


def test_a_raw_pickle_named_npz_is_refused(tmp_path):
    marker = tmp_path / "pwned"
    (tmp_path / "run.npz").write_bytes(pickle.dumps(_Marker(str(marker))))
    with pytest.raises(RunFileError, match="cannot be read as a NumPy .npz archive"):
        read_run(tmp_path / "run.npz")
    assert not marker.exists()


_UNSAFE_CALLS = {"eval", "exec", "__import__"}
_UNSAFE_ATTRS = {("pickle", "load"), ("pickle", "loads"), ("pd", "read_pickle"),
                 ("pandas", "read_pickle"), ("yaml", "load"), ("os", "system"),
                 ("marshal", "loads"), ("shelve", "open")}


def test_the_package_never_evaluates_or_unpickles():
    root = Path(workbench.__file__).parent
    found = []
    for path in sorted(root.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if not isinstance(node, ast.Call):
                continue
            f = node.func
            where = f"{path.relative_to(root)}:{node.lineno}"
            if isinstance(f, ast.Name) and f.id in _UNSAFE_CALLS:
                found.append(f"{where}: {f.id}()")
            if isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name) and \
                    (f.value.id, f.attr) in _UNSAFE_ATTRS:
                found.append(f"{where}: {f.value.id}.{f.attr}()")
            for kw in node.keywords:
                if kw.arg == "allow_pickle" and not (isinstance(kw.value, ast.Constant)
                                                     and kw.value.value is False):
                    found.append(f"{where}: allow_pickle not False")
                if kw.arg == "shell" and not (isinstance(kw.value, ast.Constant)
                                              and kw.value.value is False):
                    found.append(f"{where}: shell=")
    assert found == []
    assert len(list(root.rglob("*.py"))) > 20  # the walk really covered the package


# ------------------------------------------------------------------------------------------
# Sidecar (and plan table) paths stay inside their folder
# ------------------------------------------------------------------------------------------
def _run_with_sidecar(folder: Path, machine_file: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    write_run(Run(np.zeros((1, 100), dtype=np.float32), 1000.0, ["x"]), folder / "run.wav")
    (folder / "run.json").write_text(json.dumps({"machine_file": machine_file}))
    return folder / "run.wav"


@pytest.mark.parametrize("machine_file, message", [
    ("../m.toml", r"leads out of the sidecar's folder \('\.\.'\)"),
    ("sub/../../m.toml", r"leads out of the sidecar's folder"),
    ("/etc/hostname", "is an absolute path"),
    ("C:\\\\machines\\\\m.toml", "is an absolute path"),
    ("~/m.toml", "is an absolute path"),
])
def test_sidecar_machine_file_outside_is_refused(tmp_path, machine_file, message):
    (tmp_path / "m.toml").write_text(MACHINE)
    path = _run_with_sidecar(tmp_path / "runs", machine_file)
    with pytest.raises(RunFileError, match=message):
        read_run(path)


def test_sidecar_machine_file_symlinked_out_is_refused(tmp_path):
    (tmp_path / "outside").mkdir()
    (tmp_path / "outside" / "m.toml").write_text(MACHINE)
    path = _run_with_sidecar(tmp_path / "runs", "m.toml")
    (tmp_path / "runs" / "m.toml").symlink_to(tmp_path / "outside" / "m.toml")
    with pytest.raises(RunFileError, match="through a symbolic link, outside the sidecar's"):
        read_run(path)


def test_sidecar_machine_file_through_symlinked_folder_is_refused(tmp_path):
    (tmp_path / "outside").mkdir()
    (tmp_path / "outside" / "m.toml").write_text(MACHINE)
    path = _run_with_sidecar(tmp_path / "runs", "machines/m.toml")
    (tmp_path / "runs" / "machines").symlink_to(tmp_path / "outside", target_is_directory=True)
    with pytest.raises(RunFileError, match="through a symbolic link"):
        read_sidecar(path.with_suffix(".json"))


def test_sidecar_machine_file_inside_is_kept(tmp_path):
    path = _run_with_sidecar(tmp_path / "runs", "machines/m.toml")
    (tmp_path / "runs" / "machines").mkdir()
    (tmp_path / "runs" / "machines" / "m.toml").write_text(MACHINE)
    run = read_run(path)
    assert Path(run.machine_file) == (tmp_path / "runs" / "machines" / "m.toml").resolve()


def test_plan_speed_table_symlinked_out_is_refused(tmp_path):
    (tmp_path / "outside").mkdir()
    (tmp_path / "outside" / "speed.csv").write_text("time_s,rpm\n0,600\n10,1800\n")
    (tmp_path / "plans").mkdir()
    (tmp_path / "plans" / "speed.csv").symlink_to(tmp_path / "outside" / "speed.csv")
    text = PLAN.replace('profile = "linear"\nstart_rpm = 600.0\nend_rpm = 1800.0\n'
                        'duration_s = 4.0', 'profile = "table"\ntable = "speed.csv"')
    (tmp_path / "plans" / "p.toml").write_text(text)
    with pytest.raises(PlanFileError, match="lies outside the plan's folder"):
        read_plan(tmp_path / "plans" / "p.toml")


def test_write_run_does_not_record_a_machine_file_outside_the_folder(tmp_path):
    (tmp_path / "m.toml").write_text(MACHINE)
    (tmp_path / "runs").mkdir()
    run = Run(np.zeros((1, 10)), 100.0, ["x"], machine_file=str(tmp_path / "m.toml"))
    with pytest.warns(workbench.errors.FoldlineWarning, match="outside the output folder"):
        write_run(run, tmp_path / "runs" / "r.npz")
    assert "machine_file" not in json.loads((tmp_path / "runs" / "r.json").read_text())
    assert sorted(os.listdir(tmp_path / "runs")) == ["r.json", "r.npz"]


def test_refused_overwrite_through_the_api_keeps_the_file(tmp_path):
    (tmp_path / "r.npz").write_bytes(b"keep me")
    with pytest.raises(OutputExistsError, match="exists already"):
        write_run(Run(np.zeros((1, 10)), 100.0, ["x"]), tmp_path / "r.npz")
    assert (tmp_path / "r.npz").read_bytes() == b"keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.npz"]
