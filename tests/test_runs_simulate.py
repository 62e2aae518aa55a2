"""Tests of workbench.runs.simulate: the virtual acquisition.

Expected values come from numpy's FFT and scipy.signal (general-purpose reference libraries),
from the folding rule in REFERENCES.md (common practice) via workbench.sampling's
apparent_frequency, and from tacho-wheel arithmetic (common practice, no source).
"""

from __future__ import annotations

import hashlib
import json
import tracemalloc

import numpy as np
import pytest
import scipy.signal
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.errors import FoldlineWarning, InputError, OutputExistsError
from workbench.machine import FixedLine, Machine, OrderSource, Shaft
from workbench.runs.files import read_run
from workbench.runs.simulate import resonance_gain, simulate_run, simulate_to_wav
from workbench.sampling import AntiAliasFilter, Plan, SpeedProfile, apparent_frequency

RATE = 1000.0
BUTTER = AntiAliasFilter("butterworth", order=4, cutoff=0.4)  # -3 dB at 400 Hz


def _machine():
    # at 1200 rpm (20 Hz shaft): shaft 20 Hz (0 dB), order 7.3 -> 146 Hz (-6 dB),
    # order 31.7 -> 634 Hz (above Nyquist), fixed 730 Hz (above Nyquist, -3 dB)
    return Machine("test rig", "input", (Shaft("input"),),
                   (OrderSource("gear", "input", 7.3, level_db=-6.0),
                    OrderSource("blade", "input", 31.7),
                    FixedLine("hum", 730.0, level_db=-3.0)))


def _plan(start=1200.0, end=1200.0, duration=4.0, filt=BUTTER):
    return Plan(SpeedProfile("linear", start, end, duration), (RATE,), filt)


def _quiet(**kw):
    return {"noise_db": -np.inf, "resonance_gain_db": 0.0, **kw}


def _true_hz(machine, rpm):
    return np.array([float(line.hz_at(rpm)) for line in machine.lines()])


def test_fft_peaks_at_predicted_apparent_frequencies():
    m = _machine()
    run = simulate_run(m, _plan(), RATE, seed=3, **_quiet(noise_db=-120.0))
    x = run.channel("vibration")
    spec = np.abs(np.fft.rfft(x * np.hanning(x.size)))  # numpy FFT as the reference
    freqs = np.fft.rfftfreq(x.size, 1 / RATE)
    level = 20 * np.log10(spec / spec.max())
    peaks, _ = scipy.signal.find_peaks(level, height=-60.0)
    expected = np.sort(apparent_frequency(_true_hz(m, 1200.0), RATE))
    # 20, 146, 270 (730 folded), 366 (634 folded): one peak each, within one bin (0.25 Hz)
    np.testing.assert_allclose(expected, [20.0, 146.0, 270.0, 366.0])
    assert len(peaks) == 4
    np.testing.assert_allclose(np.sort(freqs[peaks]), expected, atol=freqs[1])


def test_line_levels_follow_the_filter_at_the_true_frequency():
    m = _machine()
    run = simulate_run(m, _plan(), RATE, seed=1, **_quiet())
    x = run.channel("vibration")
    n = x.size
    spec = np.fft.rfft(x)
    # every line sits on a bin (4 s record: 0.25 Hz bins): rectangular window, amplitude 2|X|/N
    for line, f_true in zip(m.lines(), _true_hz(m, 1200.0)):
        f_app = float(apparent_frequency(f_true, RATE))
        measured_db = 20 * np.log10(2 * abs(spec[int(round(f_app * n / RATE))]) / n)
        att_db = float(BUTTER.attenuation_db(f_true, RATE))
        # independent reference: scipy.signal.freqs on the same analog Butterworth prototype
        b, a = scipy.signal.butter(4, 2 * np.pi * 400.0, analog=True)
        _, h = scipy.signal.freqs(b, a, worN=[2 * np.pi * f_true])
        assert measured_db == pytest.approx(line.level_db - att_db, abs=0.1)
        assert measured_db == pytest.approx(line.level_db + 20 * np.log10(abs(h[0])), abs=0.1)
    # Butterworth n=4 at 2 fc is 24.10 dB down (REFERENCES.md); 730 Hz is 1.825 fc, so a bit less
    assert 20.0 < float(BUTTER.attenuation_db(730.0, RATE)) < 24.1


def test_amplitude_follows_the_filter_during_a_run_up():
    # one order line sweeping 4 x (600 -> 6000 rpm) = 40 -> 400 Hz through a 2nd-order filter
    m = Machine("m", "s", (Shaft("s"),), (OrderSource("o", "s", 4.0),))
    filt = AntiAliasFilter("butterworth", order=2, cutoff=0.15)  # -3 dB at 150 Hz
    plan = _plan(600.0, 6000.0, 2.0, filt)
    run = simulate_run(m, plan, RATE, resonance_hz=1000.0, chunk_s=0.3, **_quiet())
    # complex demodulation with the known shaft angle: the order-4 line becomes a slowly
    # varying phasor of half its amplitude; the shaft line moves to -3 orders (>= 30 Hz) and a
    # 10 Hz zero-phase low-pass (scipy.signal) removes it
    theta = plan.speed.shaft_angle_rev(run.time_s)
    z = run.channel(1) * np.exp(-2j * np.pi * 4.0 * theta)
    sos = scipy.signal.butter(4, 10.0, fs=RATE, output="sos")
    env = 2 * np.abs(scipy.signal.sosfiltfilt(sos, z.real) + 1j * scipy.signal.sosfiltfilt(
        sos, z.imag))
    for t in (0.5, 1.0, 1.5):
        k = int(t * RATE)
        f_true = 4.0 * float(plan.speed.rpm_at(t)) / 60.0
        expected_db = -float(filt.attenuation_db(f_true, RATE))
        assert 20 * np.log10(env[k]) == pytest.approx(expected_db, abs=0.1)


def test_resonance_gain_against_scipy_freqs():
    fn, q, gain_db = 300.0, 8.0, 12.0
    f = np.array([0.0, 10.0, 150.0, 281.25, 300.0, 320.0, 600.0, 3000.0])
    # normalised SDOF mobility = 2nd-order band-pass (wn/Q) s / (s^2 + (wn/Q) s + wn^2)
    # (Ewins 2000, ch. 2), evaluated with scipy.signal.freqs as the reference
    wn = 2 * np.pi * fn
    _, h = scipy.signal.freqs([wn / q, 0.0], [1.0, wn / q, wn**2], worN=2 * np.pi * f)
    expected = 1 + (10 ** (gain_db / 20) - 1) * np.abs(h)
    np.testing.assert_allclose(resonance_gain(f, fn, q, gain_db), expected, rtol=1e-12)
    assert resonance_gain(0.0, fn, q, gain_db) == 1.0
    assert 20 * np.log10(resonance_gain(fn, fn, q, gain_db)) == pytest.approx(12.0)


@settings(max_examples=50, deadline=None)
@given(fn=st.floats(1.0, 1e4), q=st.floats(0.5, 50.0), gain=st.floats(-20.0, 30.0),
       ratio=st.floats(1.0, 100.0))
def test_resonance_gain_is_symmetric_in_log_frequency(fn, q, gain, ratio):
    # property of the mobility band-pass: B(fn * a) = B(fn / a); bounded by 1 and g
    hi = resonance_gain(fn * ratio, fn, q, gain)
    lo = resonance_gain(fn / ratio, fn, q, gain)
    assert hi == pytest.approx(lo, rel=1e-9)
    g = 10 ** (gain / 20)
    assert min(1.0, g) - 1e-12 <= hi <= max(1.0, g) + 1e-12


def test_resonance_amplifies_a_line_at_its_natural_frequency():
    m = Machine("m", "s", (Shaft("s"),), (FixedLine("probe", 250.0),))
    plan = _plan(filt=AntiAliasFilter("none"))
    run = simulate_run(m, plan, RATE, noise_db=-np.inf, resonance_hz=250.0,
                       resonance_gain_db=12.0)
    x = run.channel(1)
    amp = 2 * abs(np.fft.rfft(x)[int(250.0 * x.size / RATE)]) / x.size
    assert 20 * np.log10(amp) == pytest.approx(12.0, abs=0.01)


def test_noise_level():
    m = Machine("m", "s", (Shaft("s"),), ())
    run = simulate_run(m, _plan(filt=AntiAliasFilter("none")), RATE, noise_db=-20.0,
                       resonance_gain_db=0.0, tacho_channel=False)
    x = run.channel(1)
    # remove the shaft line (20 Hz, unknown phase) by least squares, keep the noise
    t = run.time_s
    basis = np.column_stack([np.sin(2 * np.pi * 20 * t), np.cos(2 * np.pi * 20 * t)])
    coef, *_ = np.linalg.lstsq(basis, x, rcond=None)
    resid = x - basis @ coef
    # RMS of 4000 Gaussian samples: within about 3 standard errors (sigma / sqrt(2 N) ~ 1.1 %)
    assert 20 * np.log10(np.std(resid)) == pytest.approx(-20.0, abs=0.3)
    assert run.n_channels == 1 and run.tacho is None


def test_tacho_pulse_count_and_gap():
    ppr, missing = 60, 2
    m = Machine("m", "s", (Shaft("s"),), ())
    plan = Plan(SpeedProfile("linear", 600.0, 1800.0, 2.0), (20000.0,), BUTTER)
    run = simulate_run(m, plan, 20000.0, pulses_per_rev=ppr, missing_pulses=missing,
                       noise_db=-np.inf, tacho_rise_s=0.0)  # ideal steps
    v = run.channel("tacho")
    assert set(np.unique(v)) == {0.0, 5.0}
    rising = np.flatnonzero((v[1:] > 2.5) & (v[:-1] <= 2.5)) + 1
    # 2 s at a mean of 1200 rpm = 40 revolutions (arithmetic): 40 x (60 - 2) tooth edges,
    # less the first one, which rises exactly at t = 0 where sampling starts high
    revs = float(plan.speed.shaft_angle_rev(2.0))
    assert revs == pytest.approx(40.0)
    assert rising.size == 40 * (ppr - missing) - 1
    assert run.pulses_per_rev == ppr and run.missing_pulses == missing
    # the gap spans (m + 1) pitches (REFERENCES.md, tacho practice): intervals about 3x the
    # neighbouring ones, once per revolution
    gaps = np.diff(rising).astype(float)
    ratio = gaps[1:] / gaps[:-1]
    assert np.sum(ratio > 2.5) == 39
    assert np.all(np.abs(ratio[ratio > 2.5] - 3.0) < 0.35)


def test_default_tacho_edge_takes_four_samples():
    m = Machine("m", "s", (Shaft("s"),), ())
    v = simulate_run(m, _plan(filt=AntiAliasFilter("none")), RATE, pulses_per_rev=4,
                     noise_db=-np.inf).channel(2)
    rising = np.flatnonzero((v[1:] > v[:-1]))
    # A linear ramp from 0 to 5 V over 4 sample periods passes through 3 or 4 samples between
    # the rails (depending on where the edge starts between samples).
    inner = np.sum((v > 0.0) & (v < 5.0))
    assert rising.size and 3 * 319 <= inner // 2 <= 4 * 320


def test_tacho_rise_time_makes_ramps():
    m = Machine("m", "s", (Shaft("s"),), ())
    plan = _plan(filt=AntiAliasFilter("none"))
    sharp = simulate_run(m, plan, RATE, pulses_per_rev=4, noise_db=-np.inf, tacho_rise_s=0.0).channel(2)
    soft = simulate_run(m, plan, RATE, pulses_per_rev=4, noise_db=-np.inf,
                        tacho_rise_s=2.5e-3).channel(2)
    middle = (soft > 0.1) & (soft < 4.9)
    assert middle.any() and not ((sharp > 0.1) & (sharp < 4.9)).any()
    # 80 teeth/s, 12.5 samples per tooth, 4 s: 320 teeth.  The ideal step is already high at
    # the first sample, so its first edge is not seen; the ramp starts from 0 V and is.
    edges = [np.sum((x[1:] > 2.5) & (x[:-1] <= 2.5)) for x in (sharp, soft)]
    assert edges == [80 * 4 - 1, 80 * 4]


def test_result_does_not_depend_on_chunk_size():
    m = _machine()
    plan = _plan(600.0, 3000.0, 3.0)
    a = simulate_run(m, plan, RATE, seed=5, chunk_s=10.0, pulses_per_rev=3)
    b = simulate_run(m, plan, RATE, seed=5, chunk_s=0.0773, pulses_per_rev=3)
    np.testing.assert_array_equal(a.data, b.data)
    c = simulate_run(m, plan, RATE, seed=6, pulses_per_rev=3)
    assert not np.array_equal(a.data[0], c.data[0])
    np.testing.assert_array_equal(a.data[1], c.data[1])  # the tacho has no random part


def _sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_simulate_to_wav_is_deterministic_and_matches_simulate_run(tmp_path):
    m = _machine()
    plan = _plan(600.0, 3000.0, 2.0)
    kw = {"seed": 11, "pulses_per_rev": 4, "missing_pulses": 1, "chunk_s": 0.25}
    p1 = simulate_to_wav(m, plan, RATE, tmp_path / "a.wav", **kw)
    p2 = simulate_to_wav(m, plan, RATE, tmp_path / "b.wav", **kw)
    assert _sha(p1) == _sha(p2)
    assert _sha(tmp_path / "a.json") == _sha(tmp_path / "b.json")
    p3 = simulate_to_wav(m, plan, RATE, tmp_path / "c.wav", **{**kw, "seed": 12})
    assert _sha(p3) != _sha(p1)
    back = read_run(p1)
    ref = simulate_run(m, plan, RATE, **kw)
    assert back.channels == ref.channels and back.tacho == "tacho"
    assert (back.pulses_per_rev, back.missing_pulses) == (4, 1)
    np.testing.assert_array_equal(back.data, ref.data.astype(np.float32))
    notes = json.loads((tmp_path / "a.json").read_text())["notes"]["simulation"]
    assert notes["seed"] == 11 and notes["rate_hz"] == RATE and notes["machine"] == "test rig"
    assert notes["speed"] == {"profile": "linear", "start_rpm": 600.0, "end_rpm": 3000.0,
                              "duration_s": 2.0}
    with pytest.raises(OutputExistsError, match="pass --force"):
        simulate_to_wav(m, plan, RATE, p1, **kw)


@pytest.mark.parametrize("fmt", ["int16", "int24"])
def test_simulate_to_wav_integer_formats_keep_physical_units(tmp_path, fmt):
    m = _machine()
    plan = _plan(duration=1.0)
    path = simulate_to_wav(m, plan, RATE, tmp_path / "r.wav", sample_format=fmt, seed=2)
    back = read_run(path)
    ref = simulate_run(m, plan, RATE, seed=2)
    sens = back.channels[0].sensitivity
    lsb = 2.0 ** -(15 if fmt == "int16" else 23)
    np.testing.assert_allclose(back.channel(1), ref.channel(1), atol=0.51 * lsb / sens)
    np.testing.assert_allclose(back.channel(2), ref.channel(2), atol=0.51 * lsb / 0.1)


def test_machine_file_recorded_only_inside_the_output_folder(tmp_path):
    m = _machine()
    plan = _plan(duration=0.5)
    (tmp_path / "rig.toml").write_text("")
    simulate_to_wav(m, plan, RATE, tmp_path / "a.wav", machine_file=tmp_path / "rig.toml")
    assert json.loads((tmp_path / "a.json").read_text())["machine_file"] == "rig.toml"
    (tmp_path / "out").mkdir()
    with pytest.warns(FoldlineWarning, match="outside the output folder"):
        simulate_to_wav(m, plan, RATE, tmp_path / "out" / "b.wav",
                        machine_file=tmp_path / "rig.toml")
    assert "machine_file" not in json.loads((tmp_path / "out" / "b.json").read_text())


def test_streaming_memory_does_not_grow_with_duration(tmp_path):
    m = _machine()
    plan = _plan(duration=400.0)
    tracemalloc.start()
    try:
        simulate_to_wav(m, plan, RATE, tmp_path / "long.wav", chunk_s=2.0, noise_db=-80.0)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    # the whole run in float64 would be 2 x 400,000 x 8 B = 6.4 MB; chunks of 2 s are ~100 kB
    assert peak < 1.5e6
    assert read_run(tmp_path / "long.wav").n_samples == 400_000


def test_tacho_with_too_few_samples_per_pulse_warns():
    m = Machine("m", "s", (Shaft("s"),), ())
    with pytest.warns(FoldlineWarning, match="fewer than 4"):
        simulate_run(m, _plan(duration=0.1), RATE, pulses_per_rev=60)


@pytest.mark.parametrize(
    ("kw", "match"),
    [
        ({"rate_hz": 0.0}, r"^rate_hz = 0\.0: must be a positive, finite sample rate \(Hz\)$"),
        ({"seed": -1}, "seed = -1: must be an integer >= 0"),
        ({"seed": 1.5}, "seed = 1.5: must be"),
        ({"duration_s": 5.0}, r"duration_s = 5\.0: is longer than the plan's speed profile; allowed: up to 4 s"),
        ({"duration_s": 1e-6}, "gives no sample"),
        ({"duration_s": -1.0}, "duration_s = -1.0: must be a positive number"),
        ({"noise_db": np.nan}, "noise_db = nan: must be a finite number"),
        ({"resonance_hz": 0.0}, "resonance_hz = 0.0: must be a positive"),
        ({"resonance_q": -1.0}, "resonance_q = -1.0: must be a positive"),
        ({"resonance_gain_db": np.inf}, "resonance_gain_db = inf: must be a finite number"),
        ({"chunk_s": 0}, "chunk_s = 0: must be a positive"),
        ({"tacho_rise_s": -1e-3}, "tacho_rise_s = -0.001: must be at least 0"),
        ({"pulses_per_rev": 0}, "pulses_per_rev = 0: must be a positive integer"),
        ({"pulses_per_rev": 4, "missing_pulses": 4}, "missing_pulses = 4: must be an integer from 0 to 3"),
        ({"tacho_channel": "yes"}, r'tacho_channel = "yes": must be true or false'),
    ],
)
def test_validation(kw, match):
    args = {"rate_hz": RATE}
    args.update(kw)
    rate = args.pop("rate_hz")
    with pytest.raises(InputError, match=match):
        simulate_run(_machine(), _plan(), rate, **args)


def test_simulate_to_wav_checks(tmp_path):
    with pytest.raises(InputError, match="writes a .wav file; got extension '.npz'"):
        simulate_to_wav(_machine(), _plan(), RATE, tmp_path / "r.npz")
    with pytest.raises(InputError, match="rate_hz = 1000.5: cannot be stored"):
        simulate_to_wav(_machine(), _plan(), 1000.5, tmp_path / "r.wav")
    assert list(tmp_path.iterdir()) == []
