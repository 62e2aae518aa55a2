"""Critical speeds of a rotor whose response is integrated through the run-up (not quasi-steady).

The vibration is the solution of the single-degree-of-freedom rotor with rotating unbalance,
x'' + 2 zeta w x' + w^2 x = Omega(t)^2 cos(theta(t)), integrated with scipy.integrate.solve_ivp
through a linear run-up: the passage through resonance is in the signal itself.  Outside
references: the closed-form steady response (S. S. Rao, Mechanical Vibrations, 5th ed., 2011,
section 3.7) for slow sweeps, and the passage-through-resonance loss (Lewis 1932, from memory;
sampling.resonance) for the peak a sweep leaves.
"""

import math
import warnings

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from workbench.angle import resample_to_angle, tacho_angle
from workbench.angle.order_tracks import find_criticals, order_tracks
from workbench.sampling.resonance import passage_loss_db

RATE = 1024.0
NC = 1500.0


def _swept_rotor(zeta, n0, n1, t_end, revs_per_block=8.0):
    wn = 2 * np.pi * NC / 60.0
    acc = (n1 - n0) / t_end / 60.0                    # rev/s^2

    def theta(t):
        return n0 / 60.0 * t + 0.5 * acc * t * t

    def omega(t):
        return 2 * np.pi * (n0 / 60.0 + acc * t)

    def f(t, y):
        return [y[1], omega(t) ** 2 * np.cos(2 * np.pi * theta(t)) - 2 * zeta * wn * y[1]
                - wn * wn * y[0]]

    r0 = n0 / NC
    h = r0 * r0 / (1 - r0 * r0 + 2j * zeta * r0)       # steady state at the start
    sol = solve_ivp(f, (0.0, t_end), [h.real, (1j * omega(0.0) * h).real], method="DOP853",
                    rtol=1e-7, atol=1e-9, dense_output=True)
    t = np.arange(int(t_end * RATE)) / RATE
    k = np.arange(0, int(theta(t_end)))
    pulses = (-n0 / 60.0 + np.sqrt((n0 / 60.0) ** 2 + 2 * acc * k)) / acc
    angle = tacho_angle(pulses, pulses_per_rev=1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")     # a fast sweep narrows the tracker's passband
        sig = resample_to_angle(sol.sol(t)[0], RATE, angle, samples_per_rev=16)
        track, = order_tracks(sig, [1], once_per_rev=True, revs_per_block=revs_per_block)
        return find_criticals(track)


def test_slow_integrated_run_up_matches_the_closed_form():
    res = _swept_rotor(0.05, 900.0, 2100.0, 40.0)
    assert len(res.criticals) == 1
    c = res.criticals[0]
    # closed form: peak at NC / sqrt(1 - 2 zeta^2) = 1503.8 rpm, half-power AF 9.9
    assert c.rpm == pytest.approx(1503.8, rel=0.01)
    assert c.amplification_factor == pytest.approx(9.9, rel=0.10)
    assert c.phase_change_deg == pytest.approx(90.0, abs=12.0)
    assert c.sweep_rpm_per_s == pytest.approx(30.0, rel=0.02)
    assert c.sweep_loss_db < 0.1


def test_peak_left_by_the_sweep_matches_the_passage_formula():
    # zeta 0.02 at 30 rpm/s: a measurable loss, still a clean single peak
    zeta = 0.02
    res = _swept_rotor(zeta, 900.0, 2100.0, 40.0)
    c, = res.criticals
    steady = 1.0 / (2 * zeta * math.sqrt(1 - zeta * zeta))    # Rao eq. 3.81 at its peak
    measured_loss = 20 * math.log10(steady / c.amplitude)
    predicted = float(passage_loss_db(NC / 60.0, zeta, 30.0 / 60.0))
    assert measured_loss == pytest.approx(predicted, abs=0.1)
    assert c.sweep_loss_db == pytest.approx(predicted, abs=0.1)


def test_a_fast_sweep_is_not_reported_as_a_clean_critical():
    # 600 -> 2400 rpm in 8 s (225 rpm/s) through zeta 0.02: about 2 dB low, late and skewed
    res = _swept_rotor(0.02, 600.0, 2400.0, 8.0, revs_per_block=2.0)
    assert res.criticals == ()
    assert any("sweep slower" in p.reason for p in res.rejected)
