"""``foldline criticals``: JSON contract, outputs and bad input, on a run whose truth is known.

The run: the unbalance response of a damped single-degree-of-freedom rotor (critical 1500 rpm,
zeta 0.05; S. S. Rao, Mechanical Vibrations, 5th ed., 2011, section 3.7) swept slowly from 300
to 3000 rpm, with a 1-pulse-per-rev tacho whose leading edge is angle 0.
"""

import json

import numpy as np
import pytest

from workbench.angle.order_tracks import sdof_unbalance
from workbench.cli.main import main
from workbench.runs import Channel, Run, write_run

RATE = 2048.0


@pytest.fixture(scope="module")
def rotor_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("rotor")
    t_end, n0, n1 = 90.0, 300.0, 3000.0
    t = np.arange(int(t_end * RATE)) / RATE
    acc = (n1 - n0) / t_end / 60.0
    revs = n0 / 60.0 * t + 0.5 * acc * t * t
    rpm = n0 + (n1 - n0) * t / t_end
    amp, lag = sdof_unbalance(rpm, 1500.0, 0.05)
    x = amp * np.cos(2 * np.pi * revs - np.deg2rad(lag))
    # 5 V tacho, high for the first half of each revolution, edges ramped over 1 ms
    frac = np.mod(revs, 1.0)
    per_s = rpm / 60.0
    rise = np.clip(frac / (per_s * 1e-3), 0, 1)
    fall = 1.0 - np.clip((frac - 0.5) / (per_s * 1e-3), 0, 1)
    tacho = 5.0 * np.where(frac < 0.5, rise, fall)
    run = Run(np.vstack([x, tacho]), RATE, (Channel("shaft", "um"), Channel("tacho", "V")),
              tacho="tacho", pulses_per_rev=1)
    path = folder / "rotor.wav"
    write_run(run, path)
    return path


def _json(capsys, *argv):
    assert main([*argv, "--json"]) == 0
    out = capsys.readouterr().out
    return json.loads(out)


def test_criticals_json_contract(rotor_run, capsys):
    d = _json(capsys, "criticals", str(rotor_run), "--operating", "2000,2800")
    assert d["phase_reference"] == "absolute"
    assert {(t["channel"], t["order"]) for t in d["tracks"]} == {("shaft", 1.0), ("shaft", 2.0)}
    for tr in d["tracks"]:
        assert len(tr["rpm"]) == len(tr["amplitude"]) == len(tr["phase_deg"]) > 100
        assert all(0 <= p < 360 for p in tr["phase_deg"])
    assert len(d["criticals"]) == 1
    c = d["criticals"][0]
    keys = {"channel", "order", "rpm", "amplitude", "amplification_factor", "half_power_rpm",
            "phase_change_deg", "separation_margin_pct"}
    assert keys <= set(c)
    # the closed-form peak lies at 1500 / sqrt(1 - 2 zeta^2) = 1503.8 rpm; AF = 9.9 by the
    # half-power method on the same curve (computed in tests/test_angle_order_tracks.py)
    assert c["rpm"] == pytest.approx(1503.8, rel=0.01)
    assert c["amplification_factor"] == pytest.approx(9.9, rel=0.10)
    assert c["phase_change_deg"] == pytest.approx(90.0, abs=12.0)
    assert c["separation_margin_pct"] == pytest.approx((2000 - c["rpm"]) / 2000 * 100)
    lo, hi = c["half_power_rpm"]
    assert lo < c["rpm"] < hi
    assert "hazardous" in d["safety"]


def test_criticals_out_writes_tables_and_figures(rotor_run, tmp_path, capsys):
    out = tmp_path / "crit"
    d = _json(capsys, "criticals", str(rotor_run), "--out", str(out), "--orders", "1")
    names = sorted(p.name for p in out.iterdir())
    assert names == ["bode.png", "campbell.png", "criticals.csv", "polar.png", "tracks.csv"]
    assert len(d["files"]) == 5
    assert (out / "bode.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    header = (out / "tracks.csv").read_text().splitlines()[0]
    assert header == "channel,order,rpm,revs,amplitude,phase_deg"
    # an existing output is not replaced without --force: exit 2, one line
    assert main(["criticals", str(rotor_run), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("foldline: error: ") and "--force" in err[0]


@pytest.mark.parametrize("argv, match", [
    (["--orders", "0,1"], "--orders"),
    (["--operating", "1800,1500"], "--operating"),
    (["--operating", "fast"], "--operating"),
    (["--envelope", "100,200"], "--envelope"),
    (["--orders", "40"], "--samples-per-rev"),
])
def test_bad_input_is_one_line(rotor_run, capsys, argv, match):
    assert main(["criticals", str(rotor_run), *argv, "--json"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("foldline: error: ") and match in lines[0]


def test_speed_table_gives_relative_phase(rotor_run, tmp_path, capsys):
    table = tmp_path / "speed.csv"
    table.write_text("time_s,rpm\n0,300\n90,3000\n")
    d = _json(capsys, "criticals", str(rotor_run), "--speed-table", str(table), "--orders", "1")
    assert d["phase_reference"] == "relative"
    assert d["tracks"][0]["phase_reference"] == "relative"
    assert d["criticals"] and d["criticals"][0]["rpm"] == pytest.approx(1503.8, rel=0.01)
