"""The simulator shapes lines through the machine's resonances and criticals.

Truth: the single-degree-of-freedom responses in closed form (S. S. Rao, Mechanical Vibrations,
5th ed., 2011, sections 3.4 and 3.7); a slow simulated run-up, tracked with phase, must show
them where the closed form puts them.
"""

import numpy as np
import pytest

from workbench.angle.order_tracks import sdof_unbalance
from workbench.runs import simulate_run
from workbench.runs.criticals import run_criticals
from workbench.runs.simulate import mode_gain, unbalance_gain

from builders import linear_plan, one_shaft_machine

PLAN = linear_plan(300.0, 3000.0, 60.0, 2048.0, filter="none")


def _machine(**modes):
    return one_shaft_machine({"name": "blade", "order": 7.0}, shaft="rotor", **modes)


def test_gains_in_closed_form():
    m = _machine(resonance=[{"name": "frame", "hz": 30.0, "damping_ratio": 0.05}],
                 critical=[{"name": "first", "rpm": 1500.0, "damping_ratio": 0.05}])
    # the mode term at fn: 2 zeta r H = -i, so G = 1 - i (Q - 1), Q = 1 / (2 zeta) = 10
    g = mode_gain([30.0, 0.3, 3000.0], m.resonances)
    assert g[0] == pytest.approx(1 - 9j)
    assert abs(g[1]) == pytest.approx(1.0, abs=0.01) and abs(g[2]) == pytest.approx(1.0, abs=0.01)
    # unbalance response: amplitude r^2/sqrt((1-r^2)^2+(2 zeta r)^2), lag atan2(2 zeta r, 1-r^2)
    rpm = np.array([600.0, 1500.0, 2700.0])
    u = unbalance_gain(rpm, m.criticals)
    amp, lag = sdof_unbalance(rpm, 1500.0, 0.05)
    assert np.allclose(np.abs(u), amp) and np.allclose(-np.rad2deg(np.angle(u)), lag)


def test_simulated_run_up_shows_the_critical():
    m = _machine(critical=[{"name": "first", "rpm": 1500.0, "damping_ratio": 0.05}])
    run = simulate_run(m, PLAN, 2048.0, seed=1, noise_db=-80.0)
    res = run_criticals(run, orders=(1.0,), rf_map=False)
    assert res.phase_reference == "absolute"
    crit = [c for _, c in res.criticals]
    assert len(crit) == 1
    # closed-form peak 1500 / sqrt(1 - 2 zeta^2) = 1503.8 rpm; half-power AF 9.9 (same curve)
    assert crit[0].rpm == pytest.approx(1503.8, rel=0.01)
    assert crit[0].amplification_factor == pytest.approx(9.9, rel=0.10)
    # the lag rises by 90 degrees between the half-power speeds (Rao, eq. 3.82)
    assert crit[0].phase_change_deg == pytest.approx(90.0, abs=12.0)
    # the simulator's start phase is random, so the change of lag from 400 to 2900 rpm is
    # checked: closed form (Rao eq. 3.82) minus the tacho's trigger delay, half its 4-sample
    # rise time (the pulse is timed where the ramp crosses mid-level), which turns into
    # 360 x delay x rpm / 60 degrees of rotation
    tr = res.tracks_of(res.channels[0])[0]
    rpm, amp, lag = tr.sorted_by_rpm()
    closed = np.diff(sdof_unbalance([400.0, 2900.0], 1500.0, 0.05)[1])[0]
    delay_s = 2.0 / 2048.0
    expected = closed - 360.0 * delay_s * (2900.0 - 400.0) / 60.0
    assert np.interp(2900, rpm, lag) - np.interp(400, rpm, lag) == pytest.approx(expected, abs=2.0)


def test_resonance_replaces_the_default_and_shows_in_order_7():
    # 30 Hz, zeta 0.04, crossed by order 7 at 257 rpm (out of range) and by order 1 at 1800 rpm
    m = _machine(resonance=[{"name": "frame", "hz": 150.0, "damping_ratio": 0.04}])
    run = simulate_run(m, PLAN, 2048.0, seed=2, noise_db=-80.0)
    res = run_criticals(run, orders=(7.0,), rf_map=False, samples_per_rev=64)
    crit = [c for _, c in res.criticals]
    assert len(crit) == 1
    # order 7 meets 150 Hz at 60 x 150 / 7 = 1285.7 rpm
    assert crit[0].rpm == pytest.approx(1285.7, rel=0.01)
    # a flat path plus the mode: peak sqrt(1 + (Q - 1)^2) = 11.54 at Q = 12.5, level 0 dB = 1
    assert crit[0].amplitude == pytest.approx(np.sqrt(1 + 11.5 ** 2), rel=0.05)
    # no default 0.3 x rate resonance on top: far from 150 Hz the line keeps its 0 dB level
    tr = res.tracks_of(res.channels[0])[0]
    rpm, amp, _ = tr.sorted_by_rpm()
    assert np.interp(2900.0, rpm, amp) == pytest.approx(abs(mode_gain(7 * 2900 / 60, m.resonances)),
                                                         rel=0.02)
