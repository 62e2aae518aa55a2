"""Crossings of lines with resonances, and the passage-through-resonance peak loss.

The loss formula (the near-resonance envelope equation solved with the Faddeeva function,
Lewis 1932, from memory) is checked against a direct numerical integration of the oscillator
x'' + 2 zeta w x' + w^2 x = w^2 cos(phi(t)) with a linear sweep (scipy.integrate.solve_ivp):
the outside reference is the differential equation itself.
"""

import json
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from workbench.cli.main import main
from workbench.machine import machine_to_toml
from workbench.sampling import plan_from_dict
from workbench.sampling.resonance import (CROSSING_COLUMNS, fastest_sweep_rpm_per_s,
                                          find_crossings, max_sweep_kappa, passage_loss_db,
                                          passage_peak_ratio)

from builders import one_shaft_machine


def _integrated_loss_db(zeta, kappa):
    """Peak loss of a linearly swept oscillator, by direct integration (w = 1 rad/s)."""
    eta = kappa * zeta * zeta                       # d(Omega)/dt / w^2
    width = 8.0 * max(zeta, math.sqrt(eta))
    r0, r1 = 1.0 - width, 1.0 + width
    t_end = (r1 - r0) / eta

    def f(t, y):
        phi = r0 * t + 0.5 * eta * t * t
        return [y[1], math.cos(phi) - 2 * zeta * y[1] - y[0]]

    h = 1.0 / (1.0 - r0 * r0 + 2j * zeta * r0)      # steady state at the start
    sol = solve_ivp(f, (0.0, t_end), [h.real, (1j * r0 * h).real], method="DOP853",
                    rtol=1e-7, atol=1e-9, dense_output=True)
    t = np.linspace(0.0, t_end, int(t_end * 8) + 1)      # about 50 points per cycle
    x = sol.sol(t)[0]
    steady_peak = 1.0 / (2 * zeta * math.sqrt(1 - zeta * zeta))
    return -20.0 * math.log10(np.abs(x).max() / steady_peak)


@pytest.mark.parametrize("zeta, kappa", [(0.02, 1.11), (0.05, 0.5), (0.05, 3.0), (0.01, 10.0),
                                         (0.01, 100.0)])
def test_peak_loss_formula_against_integration(zeta, kappa):
    formula = -20.0 * math.log10(passage_peak_ratio(kappa))
    integrated = _integrated_loss_db(zeta, kappa)
    # the envelope solution holds for light damping; measured agreement 0.06-0.19 dB from
    # 0.4 to 12 dB of loss
    assert formula == pytest.approx(integrated, abs=0.25)


def test_one_db_sweep_limit():
    kappa = max_sweep_kappa(1.0)
    assert -20 * math.log10(passage_peak_ratio(kappa)) == pytest.approx(1.0, abs=1e-4)
    # the same limit by integration: the swept peak loses 1 dB (within the formula's 0.2 dB)
    assert _integrated_loss_db(0.03, kappa) == pytest.approx(1.0, abs=0.2)
    # slow sweeps lose nothing, fast ones a lot; the loss grows with the sweep
    assert passage_peak_ratio(1e-6) == pytest.approx(1.0, abs=1e-4)
    ratios = passage_peak_ratio([0.1, 1.0, 10.0, 100.0])
    assert np.all(np.diff(ratios) < 0)
    # units: a 20 Hz mode, zeta 0.02, order 1: d(rpm)/dt = 60 x 2 pi kappa zeta^2 fn^2
    assert fastest_sweep_rpm_per_s(20.0, 0.02, 1.0) == pytest.approx(
        60 * 2 * math.pi * kappa * 0.02 ** 2 * 400.0)
    assert passage_loss_db(20.0, 0.02, fastest_sweep_rpm_per_s(20.0, 0.02, 2.0) * 2 / 60) \
        == pytest.approx(1.0, abs=1e-3)


def _machine():
    return one_shaft_machine({"name": "unbalance", "order": 1.0, "harmonics": 2}, shaft="rotor",
                             line=[{"name": "mains", "hz": 50.0}],
                             resonance=[{"name": "frame", "hz": 20.0, "damping_ratio": 0.02}],
                             critical=[{"name": "first bending", "rpm": 2400.0, "damping_ratio": 0.05}])


def _plan(speed):
    return plan_from_dict({"speed": speed, "acquisition": {"rates_hz": [2560.0]}})


def test_crossings_of_a_linear_run_up():
    m = _machine()
    plan = _plan({"profile": "linear", "start_rpm": 300.0, "end_rpm": 3000.0, "duration_s": 60.0})
    table = find_crossings(m.lines(), plan.speed, resonances=m.resonances, criticals=m.criticals)
    assert list(table.columns) == list(CROSSING_COLUMNS)
    got = {(r.line, r.resonance): r for r in table.itertuples()}
    # order k meets fn at 60 fn / k rpm; linear profile: t = (rpm - 300) / 45 s
    one = got[("unbalance order", "frame")]
    assert one.rpm == pytest.approx(1200.0) and one.time_s == pytest.approx(20.0)
    two = got[("unbalance order x2", "frame")]
    assert two.rpm == pytest.approx(600.0) and two.time_s == pytest.approx(300.0 / 45.0)
    crit = got[("unbalance order", "first bending")]
    assert crit.rpm == pytest.approx(2400.0) and crit.kind == "critical"
    assert ("unbalance order x2", "first bending") in got          # 2x excites it at 1200 rpm
    assert not any(r.line == "mains" for r in table.itertuples())  # fixed lines do not cross
    # 45 rpm/s through a 20 Hz mode at zeta 0.02: allowed 60 x 2 pi x 1.11 x 0.0004 x 400
    # = 67 rpm/s for order 1, half that for order 2 (33.5 rpm/s < 45: too fast)
    assert one.sweep_ok and not two.sweep_ok
    assert two.slowest_sweep_rpm_per_s == pytest.approx(one.slowest_sweep_rpm_per_s / 2)
    assert two.peak_loss_db > 1.0 > one.peak_loss_db


def test_crossings_of_a_profile_that_turns_back():
    m = _machine()
    from workbench.sampling import SpeedProfile

    prof = SpeedProfile("table", table_time_s=(0.0, 30.0, 60.0), table_rpm=(600.0, 1800.0, 600.0))
    table = find_crossings(m.lines(), prof, resonances=m.resonances)
    frame1 = table[(table["line"] == "unbalance order") & (table["resonance"] == "frame")]
    assert frame1["time_s"].tolist() == pytest.approx([15.0, 45.0])


def test_plan_json_gains_crossings(tmp_path, capsys):
    mpath = tmp_path / "rig.toml"
    mpath.write_text(machine_to_toml(_machine()))
    ppath = tmp_path / "plan.toml"
    ppath.write_text('[speed]\nprofile = "linear"\nstart_rpm = 300.0\nend_rpm = 3000.0\n'
                     'duration_s = 60.0\n[acquisition]\nrates_hz = [2560.0]\n')
    assert main(["plan", str(mpath), str(ppath), "--json"]) == 0
    out, err = capsys.readouterr()
    d = json.loads(out)
    keys = {"line", "resonance", "rpm", "time_s", "sweep_ok", "slowest_sweep_rpm_per_s"}
    assert d["crossings"] and all(keys <= set(c) for c in d["crossings"])
    assert any(not c["sweep_ok"] for c in d["crossings"])
    assert "foldline: warning:" in err and "too fast" in err
