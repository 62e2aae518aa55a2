"""Regenerate the bundled demo run, byte for byte: ``python tools/make_demo_run.py``.

The run is a virtual acquisition of the invented agitator drive (sample_runs/agitator_drive.toml)
under its run-up plan (sample_runs/runup_plan.toml), recorded at 2560 S/s — the plan's lowest
candidate rate, where the fold map predicts stage-1 mesh harmonics folding into the motor
bearing bands — so the angle-domain analysis has real aliases to identify.  The plan's
recommended rate is higher; the demo shows why.
"""

from __future__ import annotations

import hashlib
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_runs"
RATE_HZ = 2560.0
SEED = 7
SETTINGS = {
    "seed": SEED,
    "noise_db": -50.0,
    "resonance_hz": 700.0,
    "resonance_q": 8.0,
    "resonance_gain_db": 12.0,
    "pulses_per_rev": 1,
    "missing_pulses": 0,
    # An optical tacho's edge takes about a millisecond: a few samples, which the pulse
    # timing interpolates (a zero rise time would leave only whole-sample timing).
    "tacho_rise_s": 1e-3,
}
#: Test metadata written into the demo sidecar (invented, like the whole scenario).
METADATA = {
    "unit_under_test": "agitator drive AD-7 (demo)",
    "serial_number": "AD7-DEMO-0001",
    "test_id": "demo run-up 300-1800 rpm",
    "operator": "demo operator",
    "date": "2026-01-15",
}
SENSORS = {
    "vibration": {"position": "motor DE bearing housing", "direction": "radial horizontal",
                  "sensor_type": "accelerometer (simulated)"},
    "tacho": {"position": "motor shaft", "direction": "",
              "sensor_type": "optical tacho, 1 pulse per rev (simulated)"},
}


def main(argv=None) -> int:
    """Write the demo run into sample_runs/, or into the folder given as the only argument."""
    argv = sys.argv[1:] if argv is None else argv
    sys.path.insert(0, str(ROOT))
    from workbench.machine import read_machine
    from workbench.runs import simulate_to_wav
    from workbench.sampling import read_plan

    machine_path = SAMPLE / "agitator_drive.toml"
    folder = Path(argv[0]) if argv else SAMPLE
    out = folder / "agitator_runup.wav"
    if folder != SAMPLE:
        # The sidecar names the machine file only when it lies beside the run.
        import shutil

        shutil.copyfile(machine_path, folder / machine_path.name)
        machine_path = folder / machine_path.name
    machine = read_machine(machine_path)
    plan = read_plan(SAMPLE / "runup_plan.toml")
    simulate_to_wav(machine, plan, RATE_HZ, out, machine_file=machine_path, force=True, **SETTINGS)
    _add_metadata(out.with_suffix(".json"))
    for p in (out, out.with_suffix(".json")):
        print(f"{p}  {p.stat().st_size} bytes  sha256 {hashlib.sha256(p.read_bytes()).hexdigest()}")
    return 0


def _add_metadata(side: Path) -> None:
    """Write the demo's test metadata into the simulator's sidecar."""
    from dataclasses import replace

    from workbench.runs import SensorInfo, TestMetadata, read_sidecar, write_sidecar

    sidecar = read_sidecar(side)
    sensors = tuple(SensorInfo(name, **fields) for name, fields in SENSORS.items())
    write_sidecar(replace(sidecar, metadata=TestMetadata(**METADATA, sensors=sensors), source=None),
                  side, force=True)


if __name__ == "__main__":
    sys.exit(main())
