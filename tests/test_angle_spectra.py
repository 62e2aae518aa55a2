"""Tests of workbench.angle.spectra: windows, order spectra, maps, cuts, envelope, peaks."""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pytest
import scipy.io
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.signal import get_window

from workbench.angle.spectra import (OrderAnalysis, OrderMap, OrderSpectrum,
                                     envelope_order_spectrum, find_order_peaks, order_cut,
                                     order_map, order_spectrum, frequency_map,
                                     window_gains)
from workbench.angle import ShaftAngle
from workbench.angle.tracking import AngleSignal, iter_resample_to_angle, resample_to_angle
from workbench.errors import FoldlineWarning, InputError

SHARED = Path(__file__).resolve().parents[2] / "shared"
CWRU = SHARED / "data" / "cwru"


def angle_signal(data, spr, rpm=600.0, revs_start=0.0):
    data = np.asarray(data, dtype=float)
    rpm = np.broadcast_to(np.asarray(rpm, dtype=float), data.shape)
    return AngleSignal(data, spr, revs_start, rpm)


def order_tone(order, amp=1.0, spr=64, revs=128, phase=0.4):
    r = np.arange(spr * revs) / spr
    return amp * np.cos(2 * np.pi * order * r + phase)


# --------------------------------------------------------------------------------------------
# Windows
# --------------------------------------------------------------------------------------------

def test_hann_coherent_gain_and_enbw():
    # Harris (1978), Table 1: Hann coherent gain 0.5, ENBW 1.5 bins; energy correction 1.633
    # (REFERENCES.md); cross-checked against scipy.signal.get_window (reference library).
    g = window_gains("hann", 4096)
    assert g.coherent_gain == pytest.approx(0.5, abs=1e-12)
    assert g.enbw_bins == pytest.approx(1.5, abs=1e-12)
    assert g.amplitude_correction == pytest.approx(2.0)
    w = get_window("hann", 4096)
    assert g.coherent_gain == pytest.approx(w.mean(), rel=1e-12)
    assert g.enbw_bins == pytest.approx(len(w) * np.sum(w ** 2) / np.sum(w) ** 2, rel=1e-12)
    assert 1 / np.sqrt(np.mean(w ** 2)) == pytest.approx(1.633, abs=1e-3)


def test_flattop_and_boxcar_gains():
    # Flat-top (scipy's five-term cosine sum): coherent gain = its first coefficient 0.21558
    # (scipy.signal.windows.flattop documentation); ENBW about 3.77 bins (Heinzel, Ruediger &
    # Schilling 2002, from memory).  Boxcar: 1 and 1 (Harris 1978).
    g = window_gains("flattop", 4096)
    assert g.coherent_gain == pytest.approx(0.21557895, abs=1e-6)
    assert g.enbw_bins == pytest.approx(3.77, abs=0.01)
    b = window_gains("boxcar", 100)
    assert (b.coherent_gain, b.enbw_bins) == (1.0, 1.0)
    with pytest.raises(InputError, match='window = "nosuch": '):
        window_gains("nosuch", 64)
    with pytest.raises(InputError, match="n"):
        window_gains("hann", 1)


# --------------------------------------------------------------------------------------------
# Order spectrum
# --------------------------------------------------------------------------------------------

def test_peak_and_rms_scaling_and_dc():
    # A bin-centred sinusoid of amplitude A shows A (peak) or A / sqrt 2 (rms) once the
    # coherent gain is corrected (Harris 1978); the DC bin shows the mean in both.
    x = 0.7 + order_tone(4.5, amp=3.0)
    s = order_spectrum(angle_signal(x, 64), revs_per_block=8)
    assert s.order[36] == 4.5 and s.order_resolution == 0.125
    assert s.amplitude[36] == pytest.approx(3.0, rel=1e-12)
    assert s.amplitude[0] == pytest.approx(0.7, rel=1e-12)
    r = order_spectrum(angle_signal(x, 64), revs_per_block=8, scaling="rms")
    assert r.amplitude[36] == pytest.approx(3.0 / math.sqrt(2), rel=1e-12)
    assert r.amplitude[0] == pytest.approx(0.7, rel=1e-12)
    assert s.n_blocks == 31 and s.enbw_bins == pytest.approx(1.5)


@settings(max_examples=30, deadline=None)
@given(st.floats(0.01, 100.0), st.integers(1, 250), st.floats(0.0, 2 * math.pi))
def test_any_bin_centred_tone_shows_its_amplitude(amp, k, phase):
    # Harris (1978): coherent-gain correction makes the peak equal the amplitude.
    x = order_tone(k / 8, amp=amp, phase=phase)
    s = order_spectrum(angle_signal(x, 64), revs_per_block=8)
    assert s.amplitude[k] == pytest.approx(amp, rel=1e-9)


def test_hann_scalloping_loss_at_half_a_bin():
    # Harris (1978): worst-case scalloping loss of the Hann window 1.42 dB.
    s = order_spectrum(angle_signal(order_tone(4.5 + 0.0625), 64), revs_per_block=8)
    assert 20 * np.log10(s.amplitude.max()) == pytest.approx(-1.42, abs=0.005)


def test_order_cut_energy_sum_recovers_off_bin_amplitude():
    # Parseval: a window-corrected sinusoid puts A^2 x ENBW into its bins (Harris 1978), so the
    # ENBW-corrected energy sum over +-2 bins gives A back wherever the tone lies.
    for offset in (0.0, 0.5, 0.3):
        order = 5.0 + offset / 8
        m = order_map(angle_signal(order_tone(order, amp=2.0), 64), revs_per_block=8)
        cut = order_cut(m, order)
        assert cut.bandwidth_orders == pytest.approx(0.5)
        assert np.allclose(20 * np.log10(cut.amplitude / 2.0), 0.0, atol=0.01), offset
    cut = order_cut(angle_signal(order_tone(5.0), 64), 5.0, revs_per_block=8, overlap=0.0)
    assert np.allclose(cut.amplitude, 1.0, rtol=1e-12)
    assert len(cut.rpm) == 16


def test_order_map_rows_sit_at_block_centres():
    spr = 32
    r = np.arange(spr * 64) / spr
    sig = AngleSignal(np.cos(2 * np.pi * 2 * r), spr, 3.0, 600.0 + 10.0 * r)
    m = order_map(sig, revs_per_block=8, overlap=0.5)
    centres = 3.0 + (np.arange(15) * 4 * spr + (8 * spr - 1) / 2) / spr
    assert np.allclose(m.revs, centres)
    assert np.allclose(m.rpm, 600.0 + 10.0 * (centres - 3.0))
    assert m.amplitude.shape == (15, 8 * spr // 2 + 1)
    assert np.all(m.n_averaged == 1)


def test_order_map_binned_by_rpm():
    spr = 16
    r = np.arange(spr * 80) / spr
    amp = np.where(r < 40, 1.0, 3.0)
    sig = AngleSignal(amp * np.cos(2 * np.pi * 3 * r), spr, 0.0, np.where(r < 40, 1000, 2000))
    m = order_map(sig, revs_per_block=4, overlap=0.0, rpm_bins=[500, 1500, 2500, 3500])
    assert m.rpm.tolist() == [1000.0, 2000.0, 3000.0]
    assert m.n_averaged.tolist() == [10, 10, 0]
    assert m.amplitude[0, 12] == pytest.approx(1.0) and m.amplitude[1, 12] == pytest.approx(3.0)
    assert np.all(np.isnan(m.amplitude[2])) and np.all(np.isnan(m.revs))
    m2 = order_map(sig, revs_per_block=4, overlap=0.0, rpm_bins=2)
    assert m2.n_averaged.tolist() == [10, 10]


def test_order_map_binned_while_streaming_equals_binned_afterwards():
    # Averaging on power into rpm bins as blocks arrive must give the map binned afterwards
    # (same definition, computed in another order).
    spr = 32
    r = np.arange(spr * 200) / spr
    data = np.cos(2 * np.pi * 3.3 * r) * (1 + 0.002 * r)
    rpm = 900 + 5 * r
    edges = np.linspace(900.0, 1900.0, 7)
    after = order_map(AngleSignal(data, spr, 0.0, rpm), revs_per_block=4, rpm_bins=edges)
    acc = OrderAnalysis(revs_per_block=4, rpm_bins=edges)
    for a in range(0, len(r), 1000):
        acc.feed(AngleSignal(data[a:a + 1000], spr, a / spr, rpm[a:a + 1000]))
    streamed = acc.order_map()
    assert np.array_equal(streamed.n_averaged, after.n_averaged)
    assert np.allclose(streamed.amplitude, after.amplitude, rtol=1e-12, equal_nan=True)
    assert np.allclose(streamed.rpm, after.rpm)
    with pytest.raises(InputError, match="bin edges"):
        OrderAnalysis(revs_per_block=4, rpm_bins=5)
    with pytest.raises(InputError, match="without rpm_bins"):
        acc.order_map(rpm_bins=3)


def test_frequency_map_binned_while_streaming():
    # Binned rows are the power average of the unbinned rows whose speed falls in each bin.
    rate = 1024.0
    t = np.arange(int(8 * rate)) / rate
    angle = ShaftAngle.from_speed_table([0.0, 8.0], [600.0, 1200.0])
    x = 2.0 * np.sin(2 * np.pi * 100.0 * t) + np.sin(2 * np.pi * 37.0 * t * (1 + t / 16))
    full = frequency_map(x, rate, angle, nperseg=512, max_hz=200.0)
    edges = np.linspace(600.0, 1200.0, 4)
    binned = frequency_map(x, rate, angle, nperseg=512, max_hz=200.0, rpm_bins=edges)
    idx = np.searchsorted(edges, full.rpm, side="right") - 1
    for b in range(3):
        rows = full.amplitude[idx == b]
        assert np.allclose(binned.amplitude[b], np.sqrt(np.mean(rows**2, axis=0)), rtol=1e-12)


@settings(max_examples=15, deadline=None)
@given(st.lists(st.integers(1, 4095), max_size=8))
def test_accumulating_pieces_equals_one_pass(cuts):
    spr = 32
    r = np.arange(4096) / spr
    data = np.cos(2 * np.pi * 3.3 * r) + 0.01 * r
    rpm = 900 + r
    whole = order_map(AngleSignal(data, spr, 1.0, rpm), revs_per_block=4)
    acc = OrderAnalysis(revs_per_block=4)
    bounds = [0] + sorted(set(cuts)) + [4096]
    for a, b in zip(bounds[:-1], bounds[1:]):
        acc.feed(AngleSignal(data[a:b], spr, 1.0 + a / spr, rpm[a:b]))
    m = acc.order_map()
    assert np.allclose(m.amplitude, whole.amplitude, rtol=1e-12, atol=1e-15)
    assert np.array_equal(m.rpm, whole.rpm)
    assert np.allclose(acc.spectrum().amplitude,
                       order_spectrum(AngleSignal(data, spr, 1.0, rpm),
                                      revs_per_block=4).amplitude, rtol=1e-12)


def test_order_map_from_the_tracking_stream_equals_the_whole_signal():
    rate = 2048.0
    t = np.arange(int(6 * rate)) / rate
    angle = ShaftAngle.from_speed_table([0.0, 6.0], [600.0, 900.0])
    x = np.cos(2 * np.pi * 3 * angle.revs_at(t))
    chunks = lambda: (x[i:i + 5000] for i in range(0, len(x), 5000))  # noqa: E731
    streamed = order_map(iter_resample_to_angle(chunks, rate, angle, samples_per_rev=32),
                         revs_per_block=4)
    whole = order_map(resample_to_angle(x, rate, angle, samples_per_rev=32), revs_per_block=4)
    assert np.array_equal(streamed.amplitude, whole.amplitude)
    assert np.array_equal(streamed.rpm, whole.rpm)


def test_order_tracking_removes_sweep_smearing():
    # Common practice (REFERENCES.md, "Smearing during a sweep"): without angle resampling,
    # order k moves k (df/dt) T^2 bins within a block of T seconds.  With a rectangular window
    # the chirp's power spreads evenly over that band, so its width is sqrt(12) x the power's
    # standard deviation.  After order tracking the same tone sits in one bin.
    rate, k, accel = 4096.0, 20.0, 2.0                  # order 20, 2 rev/s^2
    dur = 10.0
    t = np.arange(int(dur * rate)) / rate
    angle = ShaftAngle.from_speed_table([0.0, dur], [600.0, 600.0 + 60 * accel * dur])
    x = np.cos(2 * np.pi * k * angle.revs_at(t))
    fm = frequency_map(x, rate, angle, nperseg=4096, overlap=0.0, window="boxcar")
    expected_bins = k * accel * (4096 / rate) ** 2       # 40 bins of 1 Hz
    for row in fm.amplitude[2:-2]:
        p = row ** 2
        mean = np.sum(p * np.arange(len(p))) / p.sum()
        std = math.sqrt(np.sum(p * (np.arange(len(p)) - mean) ** 2) / p.sum())
        assert math.sqrt(12) * std == pytest.approx(expected_bins, rel=0.1)
    s = order_spectrum(resample_to_angle(x, rate, angle, samples_per_rev=64), revs_per_block=8)
    p = s.amplitude ** 2
    near = np.abs(s.order - k) <= 2 / 8
    assert p[near].sum() / p.sum() > 0.999
    assert s.amplitude[np.argmin(np.abs(s.order - k))] == pytest.approx(1.0, abs=0.01)


def test_frequency_map_amplitude_and_speed():
    rate = 1024.0
    t = np.arange(int(8 * rate)) / rate
    angle = ShaftAngle.from_speed_table([1.0, 7.0], [600.0, 1200.0])
    x = 2.0 * np.sin(2 * np.pi * 100.0 * t)                # on a bin of 0.25 Hz
    fm = frequency_map(x, rate, angle, nperseg=4096, overlap=0.5, max_hz=200.0)
    assert fm.hz[-1] == 200.0
    assert np.allclose(fm.amplitude[:, 400], 2.0, rtol=1e-12)
    assert np.allclose(fm.rpm, angle.rpm_at(fm.time_s))
    assert fm.time_s.min() >= 1.0 and fm.time_s.max() <= 7.0     # blocks outside dropped
    assert np.allclose(np.diff(fm.time_s), 2.0)


# --------------------------------------------------------------------------------------------
# Peaks and envelope
# --------------------------------------------------------------------------------------------

def test_find_order_peaks_orders_and_amplitudes_between_bins():
    # Quadratic interpolation of spectral peaks (Smith & Serra 1987) with the window's own
    # scalloping response (Harris 1978): orders within 0.02 bin, amplitudes within 0.1 dB.
    x = order_tone(3.33, 1.0) + order_tone(7.55, 0.5) + order_tone(12.1, 0.25) \
        + order_tone(20.0, 0.001)
    s = order_spectrum(angle_signal(x, 64), revs_per_block=10)
    pk = find_order_peaks(s, n=3, min_prominence_db=20.0)
    assert len(pk) == 3
    assert np.allclose(pk.order, [3.33, 7.55, 12.1], atol=0.002)
    assert np.allclose(20 * np.log10(pk.amplitude / [1.0, 0.5, 0.25]), 0.0, atol=0.1)
    assert np.all(pk.prominence_db > 20.0)
    only = find_order_peaks(s, order_range=(5.0, 15.0))
    assert np.allclose(only.order, [7.55, 12.1], atol=0.002)
    assert len(find_order_peaks(s, order_range=(30.0, 31.0))) == 0


def impacts_signal(angle, rate, duration, order, resonance_hz, seed=0):
    """Decaying bursts at a resonance, one every 1/order revolution (a race fault)."""
    n = int(duration * rate)
    x = np.random.default_rng(seed).normal(0.0, 0.05, n)
    rev_total = float(angle.revs_at(duration - 0.05))
    times = angle.time_at_revs(np.arange(1, int(rev_total * order)) / order)
    m = np.arange(int(0.01 * rate))
    burst = np.exp(-m / (0.0015 * rate)) * np.sin(2 * np.pi * resonance_hz * m / rate)
    for ti in times:
        i = int(ti * rate)
        x[i:i + len(burst)] += burst[: n - i]
    return x


def test_envelope_order_spectrum_finds_a_fault_order_during_a_run_up():
    # Envelope analysis (Randall & Antoni 2011): bursts once per 1/5.4152 rev, exciting a 3 kHz
    # resonance, while the speed rises 900 -> 1500 rpm; the envelope's order spectrum peaks at
    # the fault order however the speed changes.
    rate = 16384.0
    dur = 8.0
    angle = ShaftAngle.from_speed_table([0.0, dur], [900.0, 1500.0])
    x = impacts_signal(angle, rate, dur, 5.4152, 3000.0)
    s = envelope_order_spectrum(x, rate, angle, band_hz=(2000.0, 4000.0), samples_per_rev=64,
                                revs_per_block=50)
    pk = find_order_peaks(s, n=1, order_range=(4.5, 6.5))
    assert pk.order[0] == pytest.approx(5.4152, rel=1e-3)
    second = find_order_peaks(s, n=1, order_range=(10.0, 11.5))
    assert second.order[0] == pytest.approx(2 * 5.4152, rel=1e-3)


CWRU_CASES = [
    # (file number, published multiple of shaft speed, search window in orders)
    ("105", 5.4152, (4.5, 6.5)),    # inner race
    ("108", 5.4152, (4.5, 6.5)),    # inner race
    ("130", 3.5848, (3.0, 4.2)),    # outer race
]


@pytest.mark.parametrize("number, multiple, window", CWRU_CASES)
def test_cwru_bearing_fault_orders(number, multiple, window):
    # Real data: Case Western Reserve University Bearing Data Center, drive-end bearing,
    # published defect multiples (inner race 5.4152, outer race 3.5848) at the published
    # speed; 2-5 kHz envelope band as in /work/shared/data/cwru/README.md (Smith & Randall,
    # MSSP 64-65:100-131, 2015).  The largest peak in the window must be within 0.5 %.
    files = sorted(CWRU.glob(f"{number}_*.mat")) if CWRU.is_dir() else []
    if not files:
        pytest.skip(f"CWRU file {number} not found under {CWRU} (shared data folder absent)")
    mat = scipy.io.loadmat(files[0])
    x = np.ravel(mat[f"X{number}_DE_time"])
    rpm = float(np.ravel(mat[f"X{number}RPM"])[0])
    rate = 12_000.0
    angle = ShaftAngle.from_rpm(rpm, len(x) / rate)
    s = envelope_order_spectrum(x, rate, angle, band_hz=(2000.0, 5000.0), samples_per_rev=64,
                                revs_per_block=64)
    pk = find_order_peaks(s, n=1, order_range=window)
    assert len(pk) == 1
    assert pk.order[0] == pytest.approx(multiple, rel=5e-3)


# --------------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------------

SIG = angle_signal(order_tone(3.0, revs=16), 64)


@pytest.mark.parametrize("kwargs, match", [
    (dict(scaling="db"), "scaling"),
    (dict(overlap=1.0), "overlap"),
    (dict(overlap=-0.1), "overlap"),
    (dict(window="nosuch"), "window"),
    (dict(revs_per_block=4, order_resolution=0.5), "disagree"),
    (dict(order_resolution=0.0), "order_resolution"),
    (dict(revs_per_block=-1.0), "revs_per_block"),
    (dict(revs_per_block=0.1), "at least 8 samples"),
    (dict(revs_per_block=32), "less than one block of 32 rev"),
    (dict(max_order=0.0), "max_order"),
])
def test_spectrum_options_are_checked(kwargs, match):
    with pytest.raises(InputError, match=match):
        order_spectrum(SIG, **kwargs)


def test_revs_per_block_adjusted_with_a_warning():
    with pytest.warns(FoldlineWarning, match="adjusted to 2.01562"):
        s = order_spectrum(SIG, revs_per_block=2.01)
    assert s.revs_per_block == pytest.approx(129 / 64)
    assert order_spectrum(SIG, order_resolution=0.25).revs_per_block == 4.0


def test_pieces_must_be_consecutive_angle_signals():
    with pytest.raises(InputError, match="not consecutive"):
        order_spectrum([angle_signal(np.zeros(640), 64), angle_signal(np.zeros(640), 64, 600.0,
                                                                      revs_start=9.0)])
    with pytest.raises(InputError, match="AngleSignal pieces"):
        order_spectrum([np.zeros(640)])
    with pytest.raises(InputError, match="AngleSignal"):
        order_spectrum(np.zeros(640))
    with pytest.raises(InputError, match="keep_map=False"):
        acc = OrderAnalysis(keep_map=False, revs_per_block=1)
        acc.feed(SIG)
        acc.order_map()


def test_map_and_cut_options_are_checked():
    m = order_map(SIG, revs_per_block=2)
    assert isinstance(m, OrderMap)
    for bins, match in ((0, "rpm_bins"), ([3.0, 1.0], "rpm_bins"), ([1.0], "rpm_bins")):
        with pytest.raises(InputError, match=match):
            order_map(SIG, revs_per_block=2, rpm_bins=bins)
    with pytest.raises(InputError, match="order = -1.0: must be an order > 0"):
        order_cut(m, -1.0)
    with pytest.raises(InputError, match="narrower than one bin"):
        order_cut(m, 3.0, bandwidth_orders=0.1)
    with pytest.raises(InputError, match="outside the map"):
        order_cut(m, 40.0)
    with pytest.raises(InputError, match="already an OrderMap"):
        order_cut(m, 3.0, window="hann")


def test_envelope_and_rpm_map_options_are_checked():
    angle = ShaftAngle.from_rpm(600.0, 1.0)
    x = np.zeros(1000)
    for band, match in (((100.0, 50.0), "band_hz"), ((0.0, 100.0), "band_hz"),
                        ((100.0, 600.0), "band_hz"), (100.0, "band_hz")):
        with pytest.raises(InputError, match=match):
            envelope_order_spectrum(x, 1000.0, angle, band_hz=band)
    with pytest.raises(InputError, match="filter_order"):
        envelope_order_spectrum(x, 1000.0, angle, band_hz=(100, 200), filter_order=0)
    with pytest.raises(InputError, match="at least 64"):
        envelope_order_spectrum(x[:10], 1000.0, angle, band_hz=(100, 200))
    with pytest.raises(InputError, match="ShaftAngle"):
        frequency_map(x, 1000.0, None)
    with pytest.raises(InputError, match="nperseg"):
        frequency_map(x, 1000.0, angle, nperseg=4)
    with pytest.raises(InputError, match="max_hz"):
        frequency_map(x, 1000.0, angle, nperseg=64, max_hz=0.0)
    with pytest.raises(InputError, match="shorter than one block"):
        frequency_map(x, 1000.0, angle, nperseg=4096)
    with pytest.raises(InputError, match="no block centre"):
        frequency_map(x, 1000.0, ShaftAngle.from_rpm(600.0, 1.0, start_s=9.0), nperseg=64)


def test_peak_options_are_checked():
    s = order_spectrum(SIG, revs_per_block=2)
    assert isinstance(s, OrderSpectrum)
    with pytest.raises(InputError, match="OrderSpectrum"):
        find_order_peaks(np.zeros(10))
    with pytest.raises(InputError, match="n"):
        find_order_peaks(s, n=0)
    with pytest.raises(InputError, match="min_prominence_db"):
        find_order_peaks(s, min_prominence_db=-1.0)
    with pytest.raises(InputError, match="lo < hi"):
        find_order_peaks(s, order_range=(5.0, 2.0))
    with pytest.raises(InputError, match="order_range"):
        find_order_peaks(s, order_range=3.0)


def test_no_stray_warnings_in_plain_use():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        order_spectrum(SIG, revs_per_block=2)


def test_a_gap_in_the_angle_starts_blocks_afresh():
    # Two stretches of an order-5 tone with a gap of 0.5 rev between them (the speed was
    # unknown there): blocks of 4 rev (hop 2) are formed on each side only, so the count is
    # 4 + 4 rather than 9 over the joined 20 rev, and the amplitude stays exactly 1 (a block
    # across the gap would hold a phase jump and read less).
    spr = 64
    revs_a = np.arange(10 * spr) / spr
    revs_b = 10.5 + np.arange(10 * spr) / spr
    a = AngleSignal(np.cos(2 * np.pi * 5 * revs_a), spr, 0.0, np.full(len(revs_a), 900.0))
    b = AngleSignal(np.cos(2 * np.pi * 5 * revs_b + 1.0), spr, 10.5, np.full(len(revs_b), 950.0))
    acc = OrderAnalysis(revs_per_block=4)
    acc.feed(a)
    acc.feed(b)
    s = acc.spectrum()
    assert s.n_blocks == 8
    assert float(s.amplitude[np.argmin(np.abs(s.order - 5.0))]) == pytest.approx(1.0, abs=1e-9)
    m = acc.order_map()
    assert list(m.rpm) == [900.0] * 4 + [950.0] * 4
    assert m.revs[4] == pytest.approx(10.5 + (4 * spr - 1) / 2 / spr)   # first block centre
