"""Tests of workbench.angle.tracking: computed order tracking and its alias protection.

Signals are built from an analytic linear run-up: theta(t) = f0 t + a t^2 / 2 revolutions,
so an order-k tone cos(2 pi k theta(t) + phi) has the exact angle-domain samples
cos(2 pi k r + phi) at angles r; any difference is the tracker's error.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.angle.spectra import order_map, order_spectrum
from workbench.angle import ShaftAngle, detect_pulses, tacho_angle
from workbench.angle.tracking import (AngleSignal, OrderTracker, iter_resample_to_angle,
                                      resample_to_angle)
from workbench.errors import FoldlineWarning, InputError

F0, F1, DUR = 10.0, 60.0, 12.0          # rev/s, rev/s, s: 600 -> 3600 rpm
SPR = 64                                # order Nyquist 32, 0.8 x Nyquist = 25.6


def runup_angle(duration=DUR, f0=F0, f1=F1):
    return ShaftAngle.from_speed_table([0.0, duration], [60 * f0, 60 * f1])


def theta_of(t, duration=DUR, f0=F0, f1=F1):
    return f0 * t + 0.5 * (f1 - f0) / duration * t * t


def tone(t, order, phase=0.3):
    return np.cos(2 * np.pi * order * theta_of(t) + phase)


def rel_rms_db(err, ref_rms):
    return 20 * np.log10(np.sqrt(np.mean(err ** 2)) / ref_rms)


@pytest.fixture(autouse=True)
def no_adjustment_warnings():
    with warnings.catch_warnings():
        warnings.simplefilter("error", FoldlineWarning)
        yield


def test_pure_order_tone_within_minus_80_db_of_the_exact_angle_signal():
    # Band-limited interpolation (Smith & Gossett 1984; Fyfe & Munck 1997 resampling at
    # constant angle increments): error at most -80 dB relative RMS away from the record ends.
    rate = 4096.0
    t = np.arange(int(DUR * rate)) / rate
    angle = runup_angle()
    for order in (1.0, 12.5, 25.6):
        # 25.6 x 60 rev/s = 1536 Hz, below 0.4 x rate = 1638 Hz
        sig = resample_to_angle(tone(t, order), rate, angle, samples_per_rev=SPR)
        keep = slice(2 * SPR, -2 * SPR)
        exact = np.cos(2 * np.pi * order * sig.revs + 0.3)
        assert rel_rms_db(sig.data[keep] - exact[keep], np.sqrt(0.5)) < -80.0, order


def test_order_amplitudes_within_0_1_db_on_a_run_up_from_a_tacho():
    # Issue target: amplitudes within 0.1 dB for orders up to 0.8 x order Nyquist when the
    # component lies below 0.4 x rate in time.  Chain: tacho -> pulses -> angle (Fyfe & Munck
    # 1997, spline variant) -> tracking -> Hann order map (coherent gain 0.5, Harris 1978).
    rate = 4096.0
    t = np.arange(int(DUR * rate)) / rate
    theta = theta_of(t)
    tacho = 5.0 * np.clip(0.5 + (0.25 - np.abs((theta + 0.25) % 1.0 - 0.5)) / 0.3, 0, 1)
    angle = tacho_angle(detect_pulses(tacho, rate))
    orders = (1.0, 7.2, 16.0, 25.6)
    amps = (1.0, 0.5, 0.25, 2.0)
    x = sum(a * tone(t, k, phase=k) for k, a in zip(orders, amps))
    sig = resample_to_angle(x, rate, angle, samples_per_rev=SPR)
    m = order_map(sig, revs_per_block=5, overlap=0.0)           # bins every 0.2 orders
    rows = slice(1, -1)                                          # whole blocks inside
    for k, a in zip(orders, amps):
        col = int(round(k * 5))
        level_db = 20 * np.log10(m.amplitude[rows, col] / a)
        assert np.max(np.abs(level_db)) < 0.1, (k, level_db.min(), level_db.max())


@pytest.fixture(scope="module")
def alias_case():
    rate = 8192.0
    t = np.arange(int(DUR * rate)) / rate
    # order 40 (1.25 x order Nyquist; 400 .. 2400 Hz) and a fixed 3 kHz line, both below the
    # time Nyquist (4096 Hz) and above the order Nyquist (32 x 60 rev/s = 1920 Hz) throughout
    x = tone(t, 40.0) + np.cos(2 * np.pi * 3000.0 * t)
    return x, rate


def test_content_above_the_order_nyquist_is_80_db_down_anywhere(alias_case):
    # Issue target: a component above the order Nyquist but below the time Nyquist shows at
    # least 80 dB below its level anywhere in the order spectrum (here: in every block of the
    # order map, at every order).
    x, rate = alias_case
    sig = resample_to_angle(x, rate, runup_angle(), samples_per_rev=SPR)
    m = order_map(sig, revs_per_block=8)
    worst_db = 20 * np.log10(np.max(m.amplitude[1:-1]))
    assert worst_db < -80.0


def test_without_protection_the_same_content_folds(alias_case):
    # Control for the test above: plain resampling at the target grid lets order 40 fold to
    # order 64 - 40 = 24 at full level (folding, common practice).
    x, rate = alias_case
    sig = resample_to_angle(x, rate, runup_angle(), samples_per_rev=SPR, protect=False)
    s = order_spectrum(sig, revs_per_block=8)
    assert 20 * np.log10(np.max(s.amplitude)) > -20.0
    i24 = int(np.argmin(np.abs(s.order - 24.0)))
    assert s.amplitude[i24] > 0.5


def test_order_just_above_the_nyquist_is_removed_too():
    # Order 33 (3 % above the order Nyquist), amplitude 1: stopband starts at the Nyquist.
    rate = 4096.0
    t = np.arange(int(6.0 * rate)) / rate
    angle = runup_angle(6.0, 10.0, 20.0)
    x = np.cos(2 * np.pi * 33.0 * theta_of(t, 6.0, 10.0, 20.0))
    m = order_map(resample_to_angle(x, rate, angle, samples_per_rev=SPR), revs_per_block=8)
    assert 20 * np.log10(np.max(m.amplitude[1:-1])) < -80.0


def test_rpm_and_grid_follow_the_angle():
    rate = 2048.0
    t = np.arange(int(4.0 * rate)) / rate
    angle = runup_angle(4.0, 10.0, 15.0)
    sig = resample_to_angle(np.zeros_like(t), rate, angle, samples_per_rev=32)
    assert sig.revs_start == 0.0 and sig.samples_per_rev == 32
    assert np.allclose(sig.revs, np.arange(sig.n_samples) / 32)
    times = angle.time_at_revs(sig.revs)
    assert np.allclose(sig.rpm, angle.rpm_at(times), rtol=1e-9)
    # the last sample lies before the last record sample's angle
    assert sig.revs[-1] <= angle.revs_at(t[-1]) < sig.revs[-1] + 1 / 32
    assert any("alias protection" in line for line in sig.log)


def test_grid_starts_at_the_first_whole_step_inside_the_angle():
    rate = 2048.0
    angle = ShaftAngle.from_rpm(600.0, 3.0, start_s=0.5013)
    x = np.zeros(int(4 * rate))
    sig = resample_to_angle(x, rate, angle, samples_per_rev=16)
    assert sig.revs_start == 0.0
    assert sig.revs[-1] == pytest.approx(30.0)
    late = ShaftAngle.from_speed_table([-1.0, 2.0], [600.0, 600.0])     # starts before t = 0
    sig = resample_to_angle(x, rate, late, samples_per_rev=16)
    assert sig.revs_start == pytest.approx(10.0)


@settings(max_examples=15, deadline=None)
@given(st.lists(st.integers(1, 8191), max_size=6))
def test_chunked_tracking_equals_whole_record(cuts):
    rate = 2048.0
    t = np.arange(8192) / rate
    angle = runup_angle(4.0, 10.0, 14.0)
    x = np.cos(2 * np.pi * 5 * theta_of(t, 4.0, 10.0, 14.0)) + 0.1 * np.sin(2 * np.pi * 300 * t)
    whole = resample_to_angle(x, rate, angle, samples_per_rev=32)
    pieces = np.split(x, sorted(set(cuts)))
    chunked = resample_to_angle(iter(pieces), rate, angle, samples_per_rev=32)
    assert np.array_equal(chunked.data, whole.data)
    assert np.array_equal(chunked.rpm, whole.rpm)
    streamed = list(iter_resample_to_angle(lambda: iter(pieces), rate, angle, samples_per_rev=32))
    joined = AngleSignal.concatenate(streamed)
    assert np.array_equal(joined.data, whole.data)
    assert streamed[-1].log == whole.log


def test_tracker_feed_and_finish():
    rate = 1024.0
    angle = ShaftAngle.from_rpm(900.0, 3.0)
    x = np.cos(2 * np.pi * 2 * 15.0 * np.arange(int(3 * rate)) / rate)
    tr = OrderTracker(rate, angle, samples_per_rev=16)
    pieces = tr.feed(x[:1000]) + tr.feed(x[1000:]) + tr.finish()
    sig = AngleSignal.concatenate(pieces)
    assert np.allclose(sig.data[32:-32], np.cos(2 * np.pi * 2 * sig.revs[32:-32]), atol=1e-4)
    assert tr.finish() == []
    with pytest.raises(InputError, match="after finish"):
        tr.feed(x)


def test_fast_speed_change_narrows_the_passband_with_a_warning():
    # 60 -> 1200 rpm in 2 s at 16 samples/rev: the speed changes too much within one filter
    # length for the full passband; the tracker keeps the protection and says so.
    rate = 2048.0
    angle = ShaftAngle.from_speed_table([0.0, 2.0], [60.0, 1200.0])
    x = np.random.default_rng(1).standard_normal(int(2 * rate))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        sig = resample_to_angle(x, rate, angle, samples_per_rev=16)
    assert any(issubclass(w.category, FoldlineWarning) and "narrowed" in str(w.message)
               for w in caught)
    assert any("passband narrowed" in line for line in sig.log)


@pytest.mark.parametrize("kwargs, match", [
    (dict(rate_hz=0.0), "rate_hz"),
    (dict(samples_per_rev=2), "samples_per_rev"),
    (dict(samples_per_rev=64.0), "samples_per_rev"),
    (dict(max_order=0.0), "max_order"),
    (dict(max_order=31.0), "max_order"),
    (dict(protect="yes"), "protect"),
])
def test_tracker_arguments_are_checked(kwargs, match):
    args = dict(rate_hz=1000.0, samples_per_rev=64)
    args.update(kwargs)
    rate = args.pop("rate_hz")
    with pytest.raises(InputError, match=match):
        OrderTracker(rate, ShaftAngle.from_rpm(600.0, 1.0), **args)


def test_bad_inputs_are_refused():
    angle = ShaftAngle.from_rpm(600.0, 1.0)
    with pytest.raises(InputError, match="ShaftAngle"):
        resample_to_angle(np.zeros(100), 100.0, np.arange(10.0))
    with pytest.raises(InputError, match="1-D"):
        resample_to_angle(np.zeros((2, 100)), 100.0, angle)
    with pytest.raises(InputError, match="NaN"):
        resample_to_angle(np.array([0.0, np.nan] * 100), 100.0, angle)
    with pytest.raises(InputError, match="empty"):
        resample_to_angle(np.empty(0), 100.0, angle)
    with pytest.raises(InputError, match="share no complete angle step"):
        resample_to_angle(np.zeros(1000), 1000.0, ShaftAngle.from_rpm(600.0, 1.0, start_s=5.0))
    with pytest.raises(InputError, match="before the record starts"):
        OrderTracker(100.0, ShaftAngle.from_rpm(600.0, 1.0, start_s=-5.0))
    with pytest.raises(InputError, match="not consecutive"):
        AngleSignal.concatenate([AngleSignal(np.zeros(4), 4, 0.0, np.ones(4)),
                                 AngleSignal(np.zeros(4), 4, 2.0, np.ones(4))])
    with pytest.raises(InputError, match="same length"):
        AngleSignal(np.zeros(4), 4, 0.0, np.ones(3))
