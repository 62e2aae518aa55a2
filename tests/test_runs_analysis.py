"""track_run end to end: simulated runs whose truth is known, and the open CWRU recordings."""

from pathlib import Path

import numpy as np
import pytest

from workbench.errors import InputError, RunFileError
from workbench.machine import machine_from_dict
from workbench.runs import read_run, simulate_run, simulate_to_wav
from workbench.runs.analysis import run_speed, track_run
from workbench.runs.settings import TrackingSettings
from workbench.sampling import find_collisions

from builders import linear_plan

SHARED = Path(__file__).resolve().parents[2] / "shared"
CWRU = SHARED / "data" / "cwru"


def _rig():
    # Invented test rig: a 17-tooth pinion on the reference shaft and a bearing whose BPFI
    # band the folded mesh harmonics cross during the run-up.
    return machine_from_dict(
        {
            "machine": {"name": "test rig", "reference": "input"},
            "shaft": [{"name": "input"}, {"name": "output"}],
            "gear_stage": [{"name": "mesh stage", "driver": "input", "driven": "output",
                            "driver_teeth": 17, "driven_teeth": 40, "harmonics": 2}],
            "bearing": [{"name": "input DE", "shaft": "input", "rolling_elements": 9,
                         "element_diameter": 7.9375, "pitch_diameter": 38.5, "level_db": -30.0}],
        }
    )


def _plan():
    return linear_plan(900.0, 2400.0, 20.0, 1000.0, filter="butterworth", filter_order=4, cutoff=0.4,
                       threshold_db=-60.0,
                       bands=[{"name": "input DE inner race", "around": "input DE bpfi", "width_pct": 20.0}])


def test_folded_mesh_in_bearing_band_is_identified_as_alias(tmp_path):
    # Prediction, by hand from the folding rule (common practice, no source): mesh x2 is order
    # 34; at 1000 S/s it is in zone 1 for 500-1000 Hz, where its apparent order is 1000/f - 34,
    # and in zone 2 for 1000-1500 Hz, where it is 34 - 1000/f.  The BPFI band is 5.428 orders
    # (Curtin bearing, G. Forbes 2012) +-10 %: [4.885, 5.971].  Zone 1: 1000/f in
    # [38.885, 39.971] -> 1501.1-1543.0 rpm; zone 2: 1000/f in [28.029, 29.115] -> 2060.8-2140.6 rpm.
    machine, plan = _rig(), _plan()
    table = find_collisions(machine, plan, 1000.0)
    coll = table[(table["kind"] == "collision") & (table["line"] == "mesh stage mesh x2")].sort_values("zone")
    assert list(coll["zone"]) == [1, 2]
    bpfi = machine.line("input DE bpfi").order
    assert bpfi == pytest.approx(5.428, abs=1e-3)  # Curtin published BPFI multiple
    lo, hi = 0.9 * bpfi, 1.1 * bpfi
    assert coll.iloc[0]["rpm_min"] == pytest.approx(60000.0 / (34 + hi), abs=0.05)
    assert coll.iloc[0]["rpm_max"] == pytest.approx(60000.0 / (34 + lo), abs=0.05)
    assert coll.iloc[1]["rpm_min"] == pytest.approx(60000.0 / (34 - lo), abs=0.05)
    assert coll.iloc[1]["rpm_max"] == pytest.approx(60000.0 / (34 - hi), abs=0.05)
    coll = coll.iloc[:1]
    path = simulate_to_wav(machine, plan, 1000.0, tmp_path / "rig.wav", seed=3, tacho_rise_s=2e-3,
                           resonance_gain_db=0.0)
    a = track_run(path, machine=machine, samples_per_rev=64, revs_per_block=8, rf_map=False)
    ident = a.identification.table.set_index(["line", "zone"])
    assert ("mesh stage mesh x2", 1) in ident.index
    row = ident.loc[("mesh stage mesh x2", 1)]
    assert bool(row["alias"]) is True
    # The identified alias spans the predicted collision interval.
    assert row["rpm_min"] <= coll.iloc[0]["rpm_min"] + 30 and row["rpm_max"] >= coll.iloc[0]["rpm_max"] - 30
    # The direct mesh is identified as the machine's own line, not an alias.
    assert ("mesh stage mesh", 0) in ident.index


def test_speed_from_tacho_and_json_contract(tmp_path):
    # The simulated run-up is linear 900 -> 2400 rpm (the plan): the tracked speed range must
    # match within 0.1 % (the tacho requirement), and to_dict has the contract keys.
    machine, plan = _rig(), _plan()
    run = simulate_run(machine, plan, 1000.0, seed=1, tacho_rise_s=2e-3)
    a = track_run(run, samples_per_rev=64, revs_per_block=8, rf_map=False)
    t = np.linspace(1.0, 19.0, 50)
    truth = 900.0 + 75.0 * t
    err = a.shaft_angle.rpm_at(t) / truth - 1.0
    assert np.sqrt(np.mean(err**2)) < 1e-3
    d = a.to_dict()
    assert {"rpm_min", "rpm_max", "revolutions", "samples_per_rev", "order_spectrum", "peaks"} <= set(d)
    assert "envelope_peaks" not in d
    # Revolutions of a linear run-up: (900 + 2400) / 2 rpm x 20 s / 60 = 550 rev (by hand);
    # the tracked span runs from the first to the last pulse, so a little less.
    assert 545.0 < d["revolutions"] <= 550.0


def test_track_run_refuses_contradictory_speed_sources(tmp_path):
    run = simulate_run(_rig(), _plan(), 1000.0, seed=1, duration_s=2.0)
    # a Python call names the fields (the command names its options, tests/test_cli_bad_inputs.py)
    with pytest.raises(InputError, match=r'^rpm = 1000\.0 and speed_table = "x\.csv": both give '
                                         r"the speed; allowed: one speed source"):
        track_run(run, rpm=1000.0, speed_table="x.csv")
    with pytest.raises(InputError, match=r"^speed_range = \[1000\.0, 2000\.0\]: needs speed_order"):
        TrackingSettings(speed_range=(1000.0, 2000.0))
    with pytest.raises(InputError, match=r"^speed_order = 1\.0 and pulses_per_rev = 60: both give "
                                         r"the speed"):
        TrackingSettings(speed_order=1.0, speed_range=(500.0, 900.0), pulses_per_rev=60)
    with pytest.raises(InputError, match=r'^speed_channel = "drive": needs speed_scale'):
        TrackingSettings(speed_channel="drive")
    # a direct speed call keeps the same rule (and the same words)
    with pytest.raises(InputError, match=r"^speed_scale = 600\.0: needs speed_channel"):
        run_speed(run, speed_scale=600.0)
    with pytest.raises(InputError, match=r"^samples_per_rev = 4: must be a whole number"):
        track_run(run, samples_per_rev=4)
    with pytest.raises(InputError, match="envelope"):
        track_run(run, rpm=1000.0, envelope_hz=(100.0, 600.0))


def test_run_without_tacho_needs_a_speed(tmp_path):
    run = simulate_run(_rig(), _plan(), 1000.0, seed=1, duration_s=2.0, tacho_channel=False)
    with pytest.raises(RunFileError, match="no tacho channel"):
        track_run(run)


@pytest.mark.skipif(not CWRU.is_dir(), reason=f"open CWRU recordings not found at {CWRU}")
@pytest.mark.parametrize(
    "name, key, multiple",
    [
        ("105_inner_race_007_1797rpm.mat", "X105_DE_time", 5.4152),  # inner race, CWRU published
        ("108_inner_race_007_1721rpm.mat", "X108_DE_time", 5.4152),  # inner race, CWRU published
        ("130_outer_race_007_1796rpm.mat", "X130_DE_time", 3.5848),  # outer race, CWRU published
    ],
)
def test_cwru_envelope_order_peak_through_track_run(name, key, multiple):
    # Case Western Reserve University Bearing Data Center, drive-end bearing, 12 kHz; the
    # published speed stands in for a tacho (no tacho in these files).  The envelope order
    # spectrum (2-5 kHz band, Randall & Antoni, MSSP 25(2):485-520, 2011) must peak within
    # 0.5 % of the published defect multiple (searched between 0.8x and 1.2x of it).
    path = CWRU / name
    rpm = float(name.split("_")[-1].removesuffix("rpm.mat"))
    run = read_run(path, rate_hz=12000.0)
    a = track_run(run, channel=key, rpm=rpm, samples_per_rev=64, revs_per_block=64,
                  envelope_hz=(2000.0, 5000.0), rf_map=False)
    env = a.envelope
    sel = (env.order > 0.8 * multiple) & (env.order < 1.2 * multiple)
    peak = env.order[sel][np.argmax(env.amplitude[sel])]
    assert abs(peak / multiple - 1.0) < 5e-3
