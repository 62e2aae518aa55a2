"""Tests of workbench.sampling.folding: apparent frequency, Nyquist zone, apparent order."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.errors import InputError
from workbench.sampling import apparent_frequency, apparent_order, nyquist_zone

RATE = 12800.0


@pytest.mark.parametrize(
    "f_hz, apparent_hz, zone",
    [
        # REFERENCES.md "Sampling and folding" worked values at 12,800 S/s (common practice,
        # no source).
        (5000.0, 5000.0, 0),
        (9000.0, 3800.0, 1),
        (14000.0, 1200.0, 2),
        (12800.0, 0.0, 2),
        # Zone convention of docs/cli-json.md (alias), zone = floor(f / (rate/2)): exactly at
        # Nyquist is zone 1 and shows at Nyquist (common practice, no source).
        (6400.0, 6400.0, 1),
        (0.0, 0.0, 0),
        (19200.0, 6400.0, 3),
    ],
)
def test_worked_values(f_hz, apparent_hz, zone):
    assert apparent_frequency(f_hz, RATE) == apparent_hz
    assert nyquist_zone(f_hz, RATE) == zone


def test_broadcasting_shapes_and_scalars():
    f = np.array([[5000.0], [9000.0], [14000.0]])  # (3, 1)
    rates = np.array([12800.0, 25600.0])  # (2,)
    app = apparent_frequency(f, rates)
    zone = nyquist_zone(f, rates)
    assert app.shape == (3, 2) and zone.shape == (3, 2)
    assert zone.dtype == np.int64
    # 9000 Hz at 25,600 S/s is below Nyquist 12,800 Hz: direct (folding rule, common practice).
    np.testing.assert_array_equal(app[:, 1], [5000.0, 9000.0, 11600.0])
    np.testing.assert_array_equal(zone[:, 1], [0, 0, 1])
    assert np.ndim(apparent_frequency(5000.0, RATE)) == 0
    assert np.ndim(nyquist_zone(5000.0, RATE)) == 0


def test_inputs_not_mutated():
    f = np.array([9000.0, 14000.0])
    rate = np.array([12800.0, 12800.0])
    apparent_frequency(f, rate)
    nyquist_zone(f, rate)
    np.testing.assert_array_equal(f, [9000.0, 14000.0])
    np.testing.assert_array_equal(rate, [12800.0, 12800.0])


def test_edges_exact_for_awkward_rates():
    # 0.1 and 0.3 are not exact in binary; k * (rate / 2) must still land in zone k.
    for rate in (0.2, 0.6, 1.1e-3, 44100.0, 51200.0, 3.3e6):
        half = rate / 2.0
        k = np.arange(0, 200)
        f = k * half
        np.testing.assert_array_equal(nyquist_zone(f, rate), k)
        app = apparent_frequency(f, rate)
        expect = np.where(k % 2 == 1, half, 0.0)
        np.testing.assert_array_equal(app, expect)


@pytest.mark.parametrize("f_hz", [5000.3, 9000.4, 14000.7, 12810.0, 31001.2, 6399.5])
def test_fft_peak_lands_at_predicted_apparent_frequency(f_hz):
    # Independent check (REFERENCES.md): sample a sinusoid with numpy and find the FFT peak;
    # it must land at the predicted apparent frequency within one bin (numpy as reference).
    n = 12800
    t = np.arange(n) / RATE
    x = np.sin(2 * np.pi * f_hz * t) * np.hanning(n)
    spectrum = np.abs(np.fft.rfft(x))
    freqs = np.fft.rfftfreq(n, 1 / RATE)
    peak = freqs[np.argmax(spectrum)]
    assert abs(peak - apparent_frequency(f_hz, RATE)) <= RATE / n


def test_apparent_order():
    # 9000 Hz at 12,800 S/s shows at 3800 Hz; at 6000 rev/min (100 Hz) that is order 38.
    assert apparent_order(9000.0, RATE, 6000.0) == pytest.approx(38.0, rel=1e-15)
    out = apparent_order(np.array([5000.0, 9000.0]), RATE, np.array([[3000.0], [6000.0]]))
    np.testing.assert_allclose(out, [[100.0, 76.0], [50.0, 38.0]])


@pytest.mark.parametrize("bad, shown", [(-1.0, "-1.0"), (np.nan, "nan"), (np.inf, "inf"),
                                        ([100.0, -0.5], "-0.5")])
def test_bad_frequency(bad, shown):
    message = f"f_hz = {shown}: frequencies must be finite and not negative"
    with pytest.raises(InputError, match=message):
        apparent_frequency(bad, RATE)
    with pytest.raises(InputError, match=message):
        nyquist_zone(bad, RATE)


def test_non_numeric_frequency():
    with pytest.raises(InputError, match='f_hz = "abc": must be numbers'):
        apparent_frequency("abc", RATE)


@pytest.mark.parametrize("bad, shown", [(0.0, "0.0"), (-12800.0, "-12800.0"), (np.nan, "nan"),
                                        (np.inf, "inf"), ([12800.0, 0.0], "0.0")])
def test_bad_rate(bad, shown):
    message = rf"^rate_hz = {shown}: must be a positive, finite sample rate \(Hz\)$"
    with pytest.raises(InputError, match=message):
        apparent_frequency(1000.0, bad)
    with pytest.raises(InputError, match=message):
        nyquist_zone(1000.0, bad)


def test_empty_rate():
    with pytest.raises(InputError, match=r"rate_hz = \[\]: must hold at least one"):
        apparent_frequency(1000.0, [])


def test_frequency_too_far_above_rate():
    with pytest.raises(InputError, match="more than 2\\*\\*52 half-rates"):
        nyquist_zone(1e300, 1.0)


@pytest.mark.parametrize("bad", [0.0, -60.0, np.nan])
def test_apparent_order_bad_rpm(bad):
    with pytest.raises(InputError, match=f"rpm = {bad}: shaft speeds must be positive"):
        apparent_order(1000.0, RATE, bad)


def test_value_error_compatible():
    # Users catching ValueError keep working (DEVELOPERS.md, "Errors").
    with pytest.raises(ValueError):
        apparent_frequency(-1.0, RATE)


# -- properties ----------------------------------------------------------------------------
freqs = st.floats(min_value=0.0, max_value=1e6, allow_nan=False, allow_infinity=False)
rates = st.floats(min_value=1.0, max_value=2e5, allow_nan=False, allow_infinity=False)


@settings(max_examples=300, deadline=None)
@given(freqs, rates)
def test_property_range_and_zone_bracket(f, rate):
    app = apparent_frequency(f, rate)
    zone = nyquist_zone(f, rate)
    assert 0.0 <= app <= rate / 2
    assert zone * (rate / 2) <= f < (zone + 1) * (rate / 2)


@settings(max_examples=300, deadline=None)
@given(freqs, rates)
def test_property_matches_round_formula(f, rate):
    # REFERENCES.md: same as |f - rate * round(f / rate)| (common practice, no source).
    expect = abs(f - rate * np.round(f / rate))
    assert apparent_frequency(f, rate) == pytest.approx(expect, abs=1e-9 * (f + rate))


@settings(max_examples=300, deadline=None)
@given(freqs, rates, st.integers(min_value=1, max_value=50))
def test_property_periodic_in_rate(f, rate, k):
    shifted = apparent_frequency(f + k * rate, rate)
    assert shifted == pytest.approx(apparent_frequency(f, rate), abs=1e-9 * (f + k * rate + rate))


@settings(max_examples=300, deadline=None)
@given(rates, st.integers(min_value=1, max_value=50), st.floats(min_value=0.0, max_value=1.0))
def test_property_symmetric_about_multiples_of_rate(rate, k, frac):
    d = frac * rate
    above = apparent_frequency(k * rate + d, rate)
    below = apparent_frequency(k * rate - d, rate)
    assert above == pytest.approx(below, abs=1e-9 * (k + 1) * rate)
    assert above == pytest.approx(apparent_frequency(d, rate), abs=1e-9 * (k + 1) * rate)
