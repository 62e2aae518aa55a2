"""Tests of workbench.sampling.filters: anti-alias filter models."""

import dataclasses
import warnings

import numpy as np
import pytest
import scipy.signal
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.errors import FoldlineWarning, InputError
from workbench.sampling import FILTER_KINDS, AntiAliasFilter

RATE = 12800.0


def _db_freqs(b, a, f_hz):
    """Attenuation in dB of an analog (b, a) filter at f_hz, by scipy.signal.freqs."""
    _, h = scipy.signal.freqs(b, a, worN=2 * np.pi * np.asarray(f_hz))
    return -20 * np.log10(np.abs(h))


# -- Butterworth ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "order, ratio, expect_db",
    [
        # REFERENCES.md "Filters": Butterworth check values (|H| = 1/sqrt(1 + (f/fc)^2n)).
        (4, 2.0, 24.10),
        (8, 2.0, 48.16),
        (8, 1.56, 30.90),
        (4, 1.0, 3.01),
        (8, 1.0, 3.01),
    ],
)
def test_butterworth_reference_values(order, ratio, expect_db):
    cutoff = 0.39
    f = AntiAliasFilter("butterworth", order=order, cutoff=cutoff)
    assert f.attenuation_db(ratio * cutoff * RATE, RATE) == pytest.approx(expect_db, abs=0.005)


def test_butterworth_closed_form():
    # REFERENCES.md: |H(f)| = 1 / sqrt(1 + (f/fc)^(2n)).
    f_hz = np.linspace(0, 3 * RATE, 1001)
    for n in (1, 3, 8, 12):
        filt = AntiAliasFilter("butterworth", order=n, cutoff=0.4)
        expect = 10 * np.log10(1 + (f_hz / (0.4 * RATE)) ** (2 * n))
        np.testing.assert_allclose(filt.attenuation_db(f_hz, RATE), expect, atol=1e-9)


def test_butterworth_asymptote_per_octave():
    # REFERENCES.md: -6.02 n dB per octave asymptote.
    filt = AntiAliasFilter("butterworth", order=6, cutoff=0.1)
    a1, a2 = filt.attenuation_db([100 * 0.1 * RATE, 200 * 0.1 * RATE], RATE)
    assert a2 - a1 == pytest.approx(6.0206 * 6, abs=1e-3)


# -- every analog kind against scipy.signal.freqs on the same prototype -------------------
@pytest.mark.parametrize(
    "kind, kwargs, design",
    [
        ("butterworth", {}, lambda n, wn: scipy.signal.butter(n, wn, analog=True)),
        ("bessel", {}, lambda n, wn: scipy.signal.bessel(n, wn, analog=True, norm="mag")),
        ("chebyshev1", {"passband_ripple_db": 0.5},
         lambda n, wn: scipy.signal.cheby1(n, 0.5, wn, analog=True)),
        ("elliptic", {"passband_ripple_db": 0.2, "stopband_db": 80.0},
         lambda n, wn: scipy.signal.ellip(n, 0.2, 80.0, wn, analog=True)),
    ],
)
@pytest.mark.parametrize("order", [1, 2, 5, 8])
def test_analog_kinds_match_scipy_freqs(kind, kwargs, design, order):
    # Cross-check with scipy.signal.freqs on a (b, a) prototype in rad/s at the real rate
    # (REFERENCES.md "Filters"; scipy as a general-purpose reference library).
    rate, cutoff = 51200.0, 0.37
    filt = AntiAliasFilter(kind, order=order, cutoff=cutoff, **kwargs)
    b, a = design(order, 2 * np.pi * cutoff * rate)
    f_hz = np.linspace(1.0, 2.0 * rate, 777)
    expect = _db_freqs(b, a, f_hz)
    got = filt.attenuation_db(f_hz, rate)
    finite = expect < 150  # deep elliptic notches are ill-conditioned in (b, a) form
    np.testing.assert_allclose(got[finite], expect[finite], atol=1e-6)


@pytest.mark.parametrize("order", [1, 2, 3, 4, 6, 8, 10, 16])
def test_bessel_minus_3db_at_cutoff(order):
    # REFERENCES.md: scipy's norm='mag' puts -3 dB at the cutoff (scipy.signal.bessel docs).
    filt = AntiAliasFilter("bessel", order=order, cutoff=0.3)
    assert filt.attenuation_db(0.3 * RATE, RATE) == pytest.approx(10 * np.log10(2), abs=1e-9)
    assert filt.attenuation_db(0.0, RATE) == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("order", [3, 4, 7])
def test_chebyshev1_ripple_band(order):
    # Chebyshev type I definition (scipy.signal.cheby1 docs): passband ripple rp up to Wn,
    # where the gain is -rp dB; DC at -rp for even orders, 0 for odd.
    filt = AntiAliasFilter("chebyshev1", order=order, cutoff=0.4, passband_ripple_db=1.0)
    passband = np.linspace(0, 0.4 * RATE, 2001)
    att = filt.attenuation_db(passband, RATE)
    assert att.max() <= 1.0 + 1e-9 and att.min() >= -1e-9
    assert att[-1] == pytest.approx(1.0, abs=1e-9)
    assert att[0] == pytest.approx(1.0 if order % 2 == 0 else 0.0, abs=1e-9)


def test_elliptic_stopband_floor_and_notches():
    # Elliptic definition (scipy.signal.ellip docs): at least rs dB down in the stopband.
    filt = AntiAliasFilter("elliptic", order=6, cutoff=0.4, passband_ripple_db=0.1,
                           stopband_db=60.0)
    _, p, _ = scipy.signal.ellip(6, 0.1, 60.0, 0.4, analog=True, output="zpk")
    z, _, _ = filt._zpk
    notch = np.min(np.abs(z.imag))  # first transmission zero (fraction of rate)
    assert filt.attenuation_db(notch * RATE, RATE) > 200
    stop = np.linspace(notch, 5.0, 4000) * RATE
    assert filt.attenuation_db(stop, RATE).min() >= 60.0 - 1e-6
    assert filt.attenuation_db(0.4 * RATE, RATE) == pytest.approx(0.1, abs=1e-9)


# -- ideal, none -----------------------------------------------------------------------------
def test_ideal_and_none():
    ideal = AntiAliasFilter("ideal", cutoff=0.45)
    att = ideal.attenuation_db([0.0, 0.45 * RATE, 0.4501 * RATE, 3 * RATE], RATE)
    np.testing.assert_array_equal(att, [0.0, 0.0, np.inf, np.inf])
    none = AntiAliasFilter()
    np.testing.assert_array_equal(none.attenuation_db([0.0, 1e6], RATE), [0.0, 0.0])


# -- digital -------------------------------------------------------------------------------
def test_digital_defaults_and_edges():
    # Delta-sigma front ends: passband edge ~0.45 x rate, stopband from ~0.55 x rate,
    # ~90-110 dB (REFERENCES.md, common practice; datasheets vary).
    filt = AntiAliasFilter("digital")
    assert (filt.passband_edge, filt.stopband_edge, filt.stopband_db) == (0.45, 0.55, 100.0)
    f = np.array([0.0, 0.2, 0.45, 0.55, 0.7, 1.0, 1.45, 10.0]) * RATE
    np.testing.assert_array_equal(filt.attenuation_db(f, RATE),
                                  [0, 0, 0, 100, 100, 100, 100, 100])


def test_digital_transition():
    filt = AntiAliasFilter("digital", passband_edge=0.4, stopband_edge=0.6, stopband_db=90.0)
    x = np.linspace(0.4, 0.6, 501)
    att = filt.attenuation_db(x * RATE, RATE)
    assert np.all(np.diff(att) >= 0)
    assert att[0] == 0 and att[-1] == 90.0
    # A windowed-sinc low-pass is at half amplitude (-6.02 dB) at its cutoff, midway between
    # the edges (common practice, no source).
    assert filt.attenuation_db(0.5 * RATE, RATE) == pytest.approx(6.02, abs=0.1)
    # Scales with the rate.
    assert filt.attenuation_db(0.52 * 48000.0, 48000.0) == pytest.approx(
        filt.attenuation_db(0.52 * RATE, RATE), abs=1e-9)


def test_digital_transition_matches_kaiser_design():
    # Same design done directly with scipy.signal (kaiserord + firwin + freqz at 2 x rate):
    # where that response is rising (before the first stopband lobe) the model follows it.
    filt = AntiAliasFilter("digital", passband_edge=0.45, stopband_edge=0.55, stopband_db=80.0)
    numtaps, beta = scipy.signal.kaiserord(80.0, 0.1)
    taps = scipy.signal.firwin(numtaps, 0.5, window=("kaiser", beta), fs=2.0)
    x = np.linspace(0.46, 0.53, 71)
    _, h = scipy.signal.freqz(taps, 1.0, worN=x, fs=2.0)
    expect = -20 * np.log10(np.abs(h))
    np.testing.assert_allclose(filt.attenuation_db(x * RATE, RATE), expect, atol=0.05)


# -- table ---------------------------------------------------------------------------------
def test_table_log_frequency_interpolation():
    filt = AntiAliasFilter("table", table_hz_or_fraction=[100.0, 1000.0, 10000.0],
                           table_db=[0.0, 20.0, 80.0])
    # Linear in log f: the geometric mean of two points sits halfway in dB (arithmetic).
    f = [10.0, 100.0, np.sqrt(100 * 1000), 1000.0, np.sqrt(1000 * 10000), 10000.0, 1e6, 0.0]
    np.testing.assert_allclose(filt.attenuation_db(f, RATE),
                               [0.0, 0.0, 10.0, 20.0, 50.0, 80.0, 80.0, 0.0], atol=1e-12)
    # In Hz the table does not move with the rate.
    assert filt.attenuation_db(1000.0, 48000.0) == pytest.approx(20.0)


def test_table_in_fractions_of_rate():
    filt = AntiAliasFilter("table", table_hz_or_fraction=[0.1, 0.4], table_db=[0.0, 40.0],
                           table_units="fraction")
    x = 0.2  # log-midpoint of 0.1 and 0.4
    assert filt.attenuation_db(x * RATE, RATE) == pytest.approx(20.0)
    assert filt.attenuation_db(x * 48000.0, 48000.0) == pytest.approx(20.0)


# -- usable edge ---------------------------------------------------------------------------
def test_usable_edge_simple_kinds():
    assert AntiAliasFilter().usable_edge_hz(RATE) == RATE / 2
    assert AntiAliasFilter("ideal", cutoff=0.4).usable_edge_hz(RATE) == 0.4 * RATE
    assert AntiAliasFilter("digital").usable_edge_hz(RATE) == 0.45 * RATE


def test_usable_edge_butterworth_one_db_point():
    # From the Butterworth formula: attenuation A dB at f = fc (10^(A/10) - 1)^(1/2n).
    for n in (2, 4, 8):
        filt = AntiAliasFilter("butterworth", order=n, cutoff=0.39)
        expect = 0.39 * RATE * (10 ** 0.1 - 1) ** (1 / (2 * n))
        assert filt.usable_edge_hz(RATE) == pytest.approx(expect, rel=1e-9)
        expect3 = 0.39 * RATE * (10 ** 0.3 - 1) ** (1 / (2 * n))
        assert filt.usable_edge_hz(RATE, tolerance_db=3.0) == pytest.approx(expect3, rel=1e-9)


def test_usable_edge_ripple_kinds_use_the_passband():
    cheb = AntiAliasFilter("chebyshev1", order=6, cutoff=0.4, passband_ripple_db=1.0)
    assert cheb.usable_edge_hz(RATE, tolerance_db=0.5) == pytest.approx(0.4 * RATE, rel=1e-8)
    ell = AntiAliasFilter("elliptic", order=6, cutoff=0.38, passband_ripple_db=0.5)
    assert ell.usable_edge_hz(RATE, tolerance_db=0.1) == pytest.approx(0.38 * RATE, rel=1e-8)
    # With a tolerance above the ripple the edge lies a little beyond the passband edge.
    assert ell.usable_edge_hz(RATE, tolerance_db=3.0) > 0.38 * RATE


def test_usable_edge_table_and_caps():
    table = AntiAliasFilter("table", table_hz_or_fraction=[1000.0, 4000.0],
                            table_db=[0.0, 2.0])
    # 1 dB halfway in log f: sqrt(1000 * 4000) = 2000 Hz.
    assert table.usable_edge_hz(RATE) == pytest.approx(2000.0, rel=1e-9)
    late = AntiAliasFilter("table", table_hz_or_fraction=[1000.0, 1e5], table_db=[0.0, 0.5])
    assert late.usable_edge_hz(RATE) == RATE / 2
    deaf = AntiAliasFilter("table", table_hz_or_fraction=[1000.0, 1e5], table_db=[2.0, 3.0])
    assert deaf.usable_edge_hz(RATE) == 0.0
    # A cutoff at or above Nyquist protects nothing: refused (issue 15).
    for cutoff in (0.8, 0.5):
        with pytest.raises(InputError, match="at or above Nyquist"):
            AntiAliasFilter("ideal", cutoff=cutoff)


def test_usable_edge_bad_arguments():
    filt = AntiAliasFilter("butterworth", order=4, cutoff=0.4)
    with pytest.raises(InputError, match="tolerance_db = 0.0: must be above 0"):
        filt.usable_edge_hz(RATE, tolerance_db=0.0)
    with pytest.raises(InputError, match="usable_edge_hz takes one sample rate"):
        filt.usable_edge_hz([RATE, 2 * RATE])
    with pytest.raises(InputError, match=r"rate_hz = -1\.0: must be a positive, finite sample rate \(Hz\)"):
        filt.usable_edge_hz(-1.0)


# -- describe --------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "filt, text",
    [
        (AntiAliasFilter(), "no anti-alias filter"),
        (AntiAliasFilter("ideal", cutoff=0.45), "ideal low-pass, cutoff 0.45 x rate"),
        (AntiAliasFilter("butterworth", order=8, cutoff=0.39),
         "8th-order Butterworth, -3 dB at 0.39 x rate"),
        (AntiAliasFilter("bessel", order=1, cutoff=0.2), "1st-order Bessel, -3 dB at 0.2 x rate"),
        (AntiAliasFilter("bessel", order=2, cutoff=0.2), "2nd-order Bessel, -3 dB at 0.2 x rate"),
        (AntiAliasFilter("chebyshev1", order=3, cutoff=0.4),
         "3rd-order Chebyshev type I, 0.1 dB ripple to 0.4 x rate"),
        (AntiAliasFilter("elliptic", order=11, cutoff=0.4),
         "11th-order elliptic, 0.1 dB ripple to 0.4 x rate, 100 dB stopband"),
        (AntiAliasFilter("butterworth", order=12, cutoff=0.4),
         "12th-order Butterworth, -3 dB at 0.4 x rate"),
        (AntiAliasFilter("butterworth", order=21, cutoff=0.4),
         "21st-order Butterworth, -3 dB at 0.4 x rate"),
        (AntiAliasFilter("digital"),
         "digital decimation filter, flat to 0.45 x rate, 100 dB from 0.55 x rate"),
        (AntiAliasFilter("table", table_hz_or_fraction=[100, 20000], table_db=[0, 60]),
         "tabulated filter, 2 points from 100 Hz to 20000 Hz"),
        (AntiAliasFilter("table", table_hz_or_fraction=[0.1, 2], table_db=[0, 60],
                         table_units="fraction"),
         "tabulated filter, 2 points from 0.1 to 2 x rate"),
    ],
)
def test_describe(filt, text):
    assert filt.describe() == text


# -- object behaviour ------------------------------------------------------------------------
def test_frozen_hashable_and_cached():
    a = AntiAliasFilter("butterworth", order=8, cutoff=0.39)
    b = AntiAliasFilter("butterworth", order=8.0, cutoff=0.39)
    assert a == b and hash(a) == hash(b) and isinstance(b.order, int)
    with pytest.raises(dataclasses.FrozenInstanceError):
        a.cutoff = 0.4
    assert a._zpk is a._zpk  # designed once
    t = AntiAliasFilter("table", table_hz_or_fraction=np.array([1.0, 2.0]), table_db=[0, 1])
    assert t.table_hz_or_fraction == (1.0, 2.0)


def test_attenuation_input_checks_and_broadcast():
    filt = AntiAliasFilter("butterworth", order=4, cutoff=0.4)
    out = filt.attenuation_db(np.array([[1000.0], [5000.0]]), np.array([12800.0, 25600.0]))
    assert out.shape == (2, 2)
    f = np.array([1000.0, 2000.0])
    filt.attenuation_db(f, RATE)
    np.testing.assert_array_equal(f, [1000.0, 2000.0])
    with pytest.raises(InputError, match=r"f_hz = -5\.0: frequencies must be finite and not negative"):
        filt.attenuation_db(-5.0, RATE)
    with pytest.raises(InputError, match=r"rate_hz = 0\.0: must be a positive, finite sample rate"):
        filt.attenuation_db(5.0, 0.0)


# -- validation ------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"kind": "chebyshev"}, r'kind = "chebyshev": must be one of "none", "ideal", "butterworth".*\(did you mean "chebyshev1"\?\)'),
        ({"kind": "butterworth", "cutoff": 0.4}, "order: is required by filter kind"),
        ({"kind": "butterworth", "order": 0, "cutoff": 0.4}, "order = 0: must be a positive "
                                                              "integer"),
        ({"kind": "bessel", "order": 2.5, "cutoff": 0.4}, r"order = 2\.5: must be a positive integer \(got a number\)"),
        ({"kind": "bessel", "order": 33, "cutoff": 0.4}, "order = 33: must be an integer from 1 to 32"),
        ({"kind": "bessel", "order": True, "cutoff": 0.4}, r"order = true: must be a positive integer \(got a boolean\)"),
        ({"kind": "digital", "order": 4}, "order = 4: is not used by filter kind 'digital'"),
        ({"kind": "elliptic", "order": 4}, "cutoff: is required by filter kind 'elliptic'"),
        ({"kind": "ideal"}, "cutoff: is required by filter kind 'ideal'"),
        ({"kind": "ideal", "cutoff": 0.0}, "cutoff = 0.0: must be above 0"),
        ({"kind": "ideal", "cutoff": 1.0}, "cutoff = 1.0: must be above 0 and below 1"),
        ({"kind": "ideal", "cutoff": "0.4"}, 'cutoff = "0.4": must be a finite number \\(got a string\\)'),
        ({"kind": "none", "cutoff": 0.4}, "cutoff = 0.4: is not used by filter kind 'none'"),
        ({"kind": "digital", "passband_edge": 0.0}, "passband_edge = 0.0: must be above 0"),
        ({"kind": "digital", "stopband_edge": 1.2}, "stopband_edge = 1.2: must be above 0 and below 1"),
        ({"kind": "digital", "passband_edge": 0.5, "stopband_edge": 0.5},
         r"stopband_edge = 0\.5: must be above passband_edge \(0\.5\)"),
        ({"kind": "digital", "stopband_db": 0.0}, "stopband_db = 0.0: must be above 0"),
        ({"kind": "digital", "stopband_db": np.inf}, "stopband_db = inf: must be a finite number"),
        ({"kind": "chebyshev1", "order": 4, "cutoff": 0.4, "passband_ripple_db": -1.0},
         "passband_ripple_db = -1.0: must be above 0"),
        ({"kind": "elliptic", "order": 4, "cutoff": 0.4, "passband_ripple_db": 3.0,
          "stopband_db": 3.0}, r"passband_ripple_db = 3\.0: must be below stopband_db \(3 dB\)"),
        ({"kind": "table"}, "table_hz_or_fraction: is required by filter kind 'table'"),
        ({"kind": "table", "table_hz_or_fraction": [1, 2]}, "table_db: is required"),
        ({"kind": "table", "table_hz_or_fraction": [1], "table_db": [0]},
         r"table_hz_or_fraction = \[1\]: must hold at least 2 values"),
        ({"kind": "table", "table_hz_or_fraction": [1, 2, 3], "table_db": [0, 1]},
         r"table_db = \[0\.0, 1\.0\]: must have one value per frequency \(3\), got 2"),
        ({"kind": "table", "table_hz_or_fraction": [1, 3, 2], "table_db": [0, 1, 2]},
         r"table_hz_or_fraction = \[1\.0, 3\.0, 2\.0\]: point 3: frequencies must increase strictly"),
        ({"kind": "table", "table_hz_or_fraction": [0, 3], "table_db": [0, 1]},
         r"table_hz_or_fraction = \[0\.0, 3\.0\]: point 1: frequencies must be positive"),
        ({"kind": "table", "table_hz_or_fraction": [1, 3], "table_db": [0, -20]},
         r"table_db = \[0\.0, -20\.0\]: point 2: attenuation is positive dB"),
        ({"kind": "table", "table_hz_or_fraction": [1, np.nan], "table_db": [0, 1]},
         r"table_hz_or_fraction = \[1, nan\]: item 2 must be a finite number"),
        ({"kind": "table", "table_hz_or_fraction": "1,2", "table_db": [0, 1]},
         "must be a list of numbers"),
        ({"kind": "table", "table_hz_or_fraction": [1, 2], "table_db": [0, 1],
          "table_units": "khz"}, 'table_units = "khz": must be one of "hz", "fraction"'),
        ({"kind": "none", "table_db": [0, 1]}, r"table_db = \[0, 1\]: is only used by filter kind 'table'"),
    ],
)
def test_validation(kwargs, message):
    with pytest.raises(InputError, match=message):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FoldlineWarning)
            AntiAliasFilter(**kwargs)


def test_every_kind_constructs():
    args = {"ideal": {"cutoff": 0.4}, "table": {"table_hz_or_fraction": [1, 2],
                                                "table_db": [0, 3]}}
    for kind in FILTER_KINDS:
        extra = args.get(kind, {"order": 4, "cutoff": 0.4} if kind in (
            "butterworth", "bessel", "chebyshev1", "elliptic") else {})
        filt = AntiAliasFilter(kind, **extra)
        att = filt.attenuation_db(np.array([0.0, 0.1, 0.3, 2.0]) * RATE, RATE)
        assert att.shape == (4,) and not np.any(np.isnan(att))
        assert np.ndim(filt.attenuation_db(1000.0, RATE)) == 0


# -- properties ----------------------------------------------------------------------------
analog = st.sampled_from(["butterworth", "bessel", "chebyshev1", "elliptic"])


@settings(max_examples=60, deadline=None)
@given(analog, st.integers(1, 12), st.floats(0.05, 0.49), st.floats(100.0, 1e6),
       st.floats(2.0, 50.0))
def test_property_scales_with_rate(kind, order, cutoff, rate, k):
    filt = AntiAliasFilter(kind, order=order, cutoff=cutoff)
    x = np.linspace(0, 2, 41)
    np.testing.assert_allclose(filt.attenuation_db(x * rate, rate),
                               filt.attenuation_db(x * k * rate, k * rate), atol=1e-7)


@settings(max_examples=60, deadline=None)
@given(st.sampled_from(["butterworth", "bessel"]), st.integers(1, 16), st.floats(0.05, 0.49))
def test_property_monotone_lowpass(kind, order, cutoff):
    # Butterworth and Bessel magnitudes fall monotonically with frequency (no ripple).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        filt = AntiAliasFilter(kind, order=order, cutoff=cutoff)
    att = filt.attenuation_db(np.linspace(0, 5 * RATE, 2001), RATE)
    assert np.all(np.diff(att) >= -1e-9)
