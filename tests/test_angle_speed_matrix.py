"""The tacho stage against analytic truth, on the wheels, edges, rates and speeds benches record.

Every case synthesises a tacho channel from a known speed profile (linear in time, so the shaft
angle is an exact quadratic and every edge time is known in closed form), runs it through
``detect_pulses`` and ``tacho_angle``, and compares the speed with the truth at 20,000 points
of each usable stretch.  Edges come in three shapes: ideal steps (the level changes between two
samples: timed only to the sample), band-limited steps (an erf edge of 0.5 sample standard
deviation, the step response of a Gaussian low-pass, a stand-in for the recorder's anti-alias
filter) and slow analogue ramps (linear, a fifth of a pitch long).  The issue's bound: the
speed within 0.05 % RMS of the truth, the order amplitudes after tracking within 0.2 dB; the
stated uncertainty must cover the error.  Measured worst figures are in the comments.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy.special import erf

from workbench.angle import OrderAnalysis, OrderTracker, detect_pulses, tacho_angle
from workbench.errors import FoldlineWarning

SPEED_RMS = 5e-4        # the issue's bound: speed within 0.05 % RMS of the truth
ORDER_DB = 0.2          # the issue's bound on order amplitudes after tracking


class Linear:
    """Speed rising (or falling) linearly from rpm0 to rpm1 over duration_s; exact angle."""

    def __init__(self, rpm0, rpm1, duration_s):
        self.f0 = rpm0 / 60.0
        self.a = (rpm1 - rpm0) / 60.0 / duration_s
        self.duration_s = duration_s

    def revs(self, t):
        return self.f0 * t + 0.5 * self.a * t * t

    def rev_s(self, t):
        return self.f0 + self.a * t

    def time_at(self, revs):
        revs = np.asarray(revs, dtype=np.float64)
        if self.a == 0:
            return revs / self.f0
        den = self.f0 + np.sqrt(self.f0 ** 2 + 2.0 * self.a * revs)
        return np.divide(2.0 * revs, den, out=np.zeros_like(revs), where=den > 0)


def tacho(profile, rate, n_pos, n_miss, edge, *, snr_db=None, lost=(), glitches=(), seed=0):
    """Tacho samples: high for the first half of each tooth pitch, teeth in the gap absent."""
    n = int(round(profile.duration_s * rate))
    t = np.arange(n) / rate
    total = profile.revs(profile.duration_s) * n_pos
    k = np.arange(0, int(np.floor(total)) + 1)
    present = (k % n_pos) < n_pos - n_miss
    present &= ~np.isin(k, lost)
    rise = profile.time_at(k[present] / n_pos)
    fall = profile.time_at((k[present] + 0.5) / n_pos)
    keep = fall < profile.duration_s
    rise, fall = rise[keep], fall[keep]
    x = np.zeros(n)
    # Ideal square wave: +1 from each rising edge to its falling edge.
    start = np.ceil(rise * rate).astype(np.int64)
    stop = np.ceil(fall * rate).astype(np.int64)
    marks = np.zeros(n + 1)
    np.add.at(marks, np.minimum(start, n), 1.0)
    np.add.at(marks, np.minimum(stop, n), -1.0)
    x = np.cumsum(marks)[:n]
    if edge != "ideal":
        if edge == "erf":
            sigma = 0.5 / rate                               # band-limited step
            half = 5 * sigma

            def shape(u):
                return 0.5 * (1.0 + erf(u / (math.sqrt(2.0) * sigma)))
        else:
            pitch = 1.0 / (n_pos * profile.rev_s(0.5 * (rise + fall)))
            dur = 0.2 * float(np.min(pitch))                 # slow analogue ramp
            half = 0.5 * dur

            def shape(u):
                return np.clip(u / dur + 0.5, 0.0, 1.0)
        width = int(np.ceil(half * rate)) + 1
        offs = np.arange(-width, width + 1)
        for times, sign in ((rise, 1.0), (fall, -1.0)):
            idx = np.ceil(times * rate).astype(np.int64)[:, None] + offs[None, :]
            ok = (idx >= 0) & (idx < n)
            u = idx / rate - times[:, None]
            corr = sign * (shape(u) - (u >= 0))
            np.add.at(x, idx[ok], corr[ok])
    for g in glitches:                                       # level drops for 3 samples
        i = int(profile.time_at(g / n_pos) * rate) + 2
        x[i:i + 3] = 0.0
    if snr_db is not None:
        rng = np.random.default_rng(seed)
        x = x + rng.standard_normal(n) * math.sqrt(np.var(x) / 10 ** (snr_db / 10))
    return x


def speed_errors(angle, profile):
    t = np.concatenate([np.linspace(a, b, 20_000) for a, b in angle.stretches])
    e = angle.rpm_at(t) / (60.0 * profile.rev_s(t)) - 1.0
    return float(np.sqrt(np.mean(e * e))), float(np.max(np.abs(e)))


def run_case(profile, rate, n_pos, n_miss, edge, **kw):
    x = tacho(profile, rate, n_pos, n_miss, edge, **kw)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FoldlineWarning)
        angle = tacho_angle(detect_pulses(x, rate), pulses_per_rev=n_pos, missing_pulses=n_miss,
                            sample_rate_hz=rate)
    return angle, caught


def order_levels_db(angle, profile, rate, orders):
    """Track an analytic vibration of unit-amplitude orders with the tacho's angle."""
    n = int(round(profile.duration_s * rate))
    t = np.arange(n) / rate
    x = sum(np.cos(2 * np.pi * k * profile.revs(t)) for k in orders)
    acc = OrderAnalysis(revs_per_block=16)
    for piece in OrderTracker(rate, angle, samples_per_rev=256).stream(x):
        acc.feed(piece)
    s = acc.spectrum()
    return [20 * math.log10(float(s.amplitude[np.argmin(np.abs(s.order - k))])) for k in orders]


# The issue's table: every case processed, speed within 0.05 % RMS, orders within 0.2 dB.
# (Measured: RMS 0.0036 %, 0.0067 %, 0.0073 %, 0.0025 %, 0.0026 %; orders within 0.001 dB.)
TABLE = [
    pytest.param(Linear(3600, 900, 40), 25600, 60, 2, "ideal", id="60-2 steps 25.6k coast-down"),
    pytest.param(Linear(3600, 900, 40), 25600, 60, 2, "erf", id="60-2 band-limited 25.6k"),
    pytest.param(Linear(3600, 900, 40), 25600, 60, 0, "erf", id="60 band-limited 25.6k"),
    pytest.param(Linear(600, 6000, 600), 51200, 1, 0, "ideal", id="1 ppr steps 51.2k 10 min"),
    pytest.param(Linear(600, 6000, 600), 25600, 1, 0, "erf", id="1 ppr band-limited 25.6k 10 min"),
]


@pytest.mark.slow
@pytest.mark.parametrize("profile, rate, n_pos, n_miss, edge", TABLE)
def test_the_issues_table_is_processed_within_the_bounds(profile, rate, n_pos, n_miss, edge):
    angle, _ = run_case(profile, rate, n_pos, n_miss, edge)
    assert len(angle.stretches) == 1
    rms, worst = speed_errors(angle, profile)
    assert rms < SPEED_RMS, (rms, worst)
    assert worst < 5e-3, (rms, worst)
    # The stated RMS uncertainty is the actual RMS error within a factor of 3 either way.
    assert rms < 3 * angle.timing.speed_uncertainty
    if profile.duration_s <= 60:
        levels = order_levels_db(angle, profile, rate, (10.0, 37.5))
        assert max(abs(v) for v in levels) < ORDER_DB, levels


# Wheels x edges x rates x speeds: each wheel on an edge shape, rate and speed range a bench
# would record it with (pulse rates from 5 Hz to 24 kHz; 60 to 12,000 rpm; 2.56 to 102.4 kHz).
MATRIX = [
    (1, 0, "ideal", 2560, Linear(60, 600, 20)),
    (1, 0, "erf", 102400, Linear(3000, 12000, 5)),
    (2, 0, "erf", 2560, Linear(300, 3000, 10)),
    (2, 0, "ramp", 25600, Linear(6000, 600, 10)),
    (30, 0, "ideal", 10240, Linear(600, 1800, 10)),
    (30, 0, "ramp", 25600, Linear(60, 600, 20)),
    (36, 1, "erf", 51200, Linear(1000, 6000, 10)),
    (36, 1, "ramp", 12800, Linear(500, 3000, 10)),
    (60, 0, "ideal", 51200, Linear(6000, 1200, 8)),
    (60, 2, "ideal", 102400, Linear(6000, 12000, 5)),
    (60, 2, "ramp", 51200, Linear(1200, 4800, 8)),
    (120, 0, "erf", 102400, Linear(3000, 6000, 5)),
    (120, 0, "ideal", 25600, Linear(600, 3000, 10)),
]


@pytest.mark.parametrize("n_pos, n_miss, edge, rate, profile", MATRIX,
                         ids=[f"{n}-{m} {e} {r / 1000:g}k" for n, m, e, r, _ in MATRIX])
def test_wheel_edge_rate_speed_matrix(n_pos, n_miss, edge, rate, profile):
    # Measured worst over the matrix: RMS 0.016 % (1 ppr at 2.56 kHz), worst 0.17 % at the
    # first pulse of the 2 ppr record at 2.56 kHz (one-sided smoothing, inside a span the
    # warning names).
    angle, caught = run_case(profile, rate, n_pos, n_miss, edge)
    rms, worst = speed_errors(angle, profile)
    assert rms < SPEED_RMS, (rms, worst)
    assert worst < 5e-3, (rms, worst)
    assert rms < 3 * angle.timing.speed_uncertainty + 2e-5
    for w in caught:      # any warning is the one-line tolerance warning, with its figures
        assert "beyond the speed tolerance" in str(w.message) and "\n" not in str(w.message)


@pytest.mark.parametrize("n_pos, n_miss", [(1, 0), (60, 2)])
def test_run_up_from_rest_to_6000_rpm_in_5_s(n_pos, n_miss):
    # The fastest sweep the issue names: 0 -> 6000 rpm in 5 s (20 rev/s^2).  The first pulse
    # intervals shrink fast; the pitch prediction follows them (no pulse doubted) and the
    # smoothing is held back where the speed changes that fast.  Measured: 1 ppr 0.0023 % RMS,
    # 60-2 0.0059 % RMS (worst 0.18 % in the first 10 ms, at 49 rpm, inside the warned span).
    profile = Linear(0, 6000, 5)
    angle, _ = run_case(profile, 51200, n_pos, n_miss, "erf")
    # No pulse is taken for extra or missing; the few the detector timed 0.68 sample off (an
    # edge falling just so between samples) are given no weight and listed.
    assert all("timed far off" in r for r in angle.doubted.reason)
    assert len(angle.doubted) <= 10
    rms, worst = speed_errors(angle, profile)
    assert rms < SPEED_RMS and worst < 5e-3, (rms, worst)
    levels = order_levels_db(angle, profile, 51200, (4.0, 37.5))
    assert max(abs(v) for v in levels) < ORDER_DB, levels


@pytest.mark.parametrize("n_pos, n_miss, rpm", [(1, 0, (600, 3000)), (60, 2, (1200, 1200))])
def test_noise_at_10_db_snr(n_pos, n_miss, rpm):
    # White noise 10 dB below the tacho's own power on band-limited edges.  Measured: 1 ppr
    # 0.0026 % RMS, 60-2 at a steady 1200 rpm 0.0031 % RMS.
    profile = Linear(*rpm, 5 if n_pos > 1 else 20)
    angle, _ = run_case(profile, 25600, n_pos, n_miss, "erf", snr_db=10.0, seed=4)
    rms, worst = speed_errors(angle, profile)
    assert rms < SPEED_RMS and worst < 5e-3, (rms, worst)


def test_glitches_double_triggers_and_lost_pulses_on_a_60_2_wheel():
    # Three glitches (the level drops for 3 samples mid-tooth: a double trigger each) and two
    # single lost teeth away from the gap: each extra pulse is removed and listed, each lost
    # tooth bridged and listed, and the speed stays within the bound.
    profile = Linear(1500, 3000, 6)
    lost = [1207, 3333]
    glitches = [600.2, 2400.2, 4000.2]
    angle, _ = run_case(profile, 51200, 60, 2, "erf", lost=lost, glitches=glitches)
    reasons = list(angle.doubted.reason)
    assert sum("extra pulse removed" in r for r in reasons) == 3
    assert sum("missing pulse" in r for r in reasons) == 2
    assert len(angle.stretches) == 1
    rms, worst = speed_errors(angle, profile)
    assert rms < SPEED_RMS and worst < 5e-3, (rms, worst)


def test_a_stop_splits_the_record_and_each_stretch_is_tracked():
    # 1500 rpm for 3 s, the tacho dead for 1 s (a lost wheel: nothing recorded), 1500 rpm
    # again: the speed there is unknowable, named, and the two stretches are tracked apart.
    # An order-5 tone of amplitude 1 reads 1 within 0.2 dB in the order spectrum (no block
    # spans the gap), and the rpm-frequency picture has no value inside it.
    rate = 12800.0
    profile = Linear(1500, 1500, 7)
    x = tacho(profile, rate, 30, 0, "erf")
    x[int(3 * rate):int(4 * rate)] = 0.0
    with pytest.warns(FoldlineWarning, match=r"speed is unknown in 2\.99\d-4\.00\d s"):
        angle = tacho_angle(detect_pulses(x, rate), pulses_per_rev=30, sample_rate_hz=rate)
    assert len(angle.stretches) == 2 and np.isnan(angle.rpm_at(3.5))
    t = np.arange(int(7 * rate)) / rate
    vib = np.cos(2 * np.pi * 5 * profile.revs(t))
    acc = OrderAnalysis(revs_per_block=8)
    for piece in OrderTracker(rate, angle, samples_per_rev=64).stream(vib):
        acc.feed(piece)
    s = acc.spectrum()
    assert abs(20 * math.log10(float(s.amplitude[np.argmin(np.abs(s.order - 5))]))) < ORDER_DB
    # 3 s and 3 s at 25 rev/s in blocks of 8 rev with half overlap: 17 blocks a side at most.
    assert s.n_blocks <= 2 * 17
