"""run_criticals: the phase reference of each tacho kind, and coast-downs.

Truth: the simulator's rotor with one critical (1500 rpm, zeta 0.05) whose order-1 response is
the closed-form unbalance response (S. S. Rao, Mechanical Vibrations, 5th ed., 2011, section
3.7); the same seed gives the same line phases whatever the tacho wheel, so a once-per-rev
reference (1 pulse per rev, or the first tooth after a wheel's gap) must give the same lag.
"""

import warnings

import numpy as np
import pytest

from workbench.errors import FoldlineWarning, InputError
from workbench.runs import simulate_run
from workbench.runs.criticals import run_criticals

from builders import linear_plan, one_shaft_machine

RATE = 8192.0
MACHINE = one_shaft_machine(shaft="rotor",
                            critical=[{"name": "first", "rpm": 1500.0, "damping_ratio": 0.05}])


def _plan(n0, n1):
    return linear_plan(n0, n1, 40.0, RATE, filter="none")


def _lag(res, rpm):
    tr = res.tracks_of(res.channels[0])[0]
    r, _, lag = tr.sorted_by_rpm()
    return float(np.interp(rpm, r, lag))


@pytest.fixture(scope="module")
def wheels():
    out = {}
    for ppr, miss in ((1, 0), (24, 2), (24, 0)):
        # the same edge rise time (4 samples) on every wheel: the same trigger delay
        run = simulate_run(MACHINE, _plan(600.0, 2400.0), RATE, seed=5, noise_db=-90.0,
                           pulses_per_rev=ppr, missing_pulses=miss)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FoldlineWarning)
            out[(ppr, miss)] = run_criticals(run, orders=(1.0,), rf_map=False)
    return out


def test_once_per_rev_references_agree(wheels):
    one, gap, regular = wheels[(1, 0)], wheels[(24, 2)], wheels[(24, 0)]
    assert one.phase_reference == "absolute" and gap.phase_reference == "absolute"
    assert regular.phase_reference == "relative"
    for rpm in (900.0, 1500.0, 2100.0):
        # the same angle 0 (the simulator's first tooth after the gap rises at 0 mod 1 rev):
        # the lags agree within the pulse timing
        assert _lag(gap, rpm) == pytest.approx(_lag(one, rpm), abs=1.0)
    for res in wheels.values():
        c, = [c for _, c in res.criticals]
        assert c.rpm == pytest.approx(1503.8, rel=0.01)


def test_coast_down_finds_the_same_critical():
    run = simulate_run(MACHINE, _plan(2400.0, 600.0), 2048.0, seed=5, noise_db=-90.0)
    res = run_criticals(run, orders=(1.0,), rf_map=False)
    c, = [c for _, c in res.criticals]
    assert c.rpm == pytest.approx(1503.8, rel=0.01)
    assert c.amplification_factor == pytest.approx(9.9, rel=0.10)
    # the lag rises with speed whichever way the run went (Rao eq. 3.82)
    assert c.phase_change_deg == pytest.approx(90.0, abs=12.0)


def test_bad_settings_are_named_by_field():
    # a Python call names the fields; the command names its options (tests/test_cli_criticals.py)
    run = simulate_run(MACHINE, _plan(600.0, 2400.0), 2048.0, seed=5, noise_db=-90.0)
    with pytest.raises(InputError, match=r"^samples_per_rev = 4: must be a whole number"):
        run_criticals(run, samples_per_rev=4)
    with pytest.raises(InputError, match=r"^revs_per_block = -1: must be a positive number"):
        run_criticals(run, revs_per_block=-1)
    with pytest.raises(InputError, match=r"^orders = \[1\.0, 90\.0\]: order 90 is beyond the "
                                         r"usable .*; raise samples_per_rev"):
        run_criticals(run, orders=(1, 90), samples_per_rev=128)
