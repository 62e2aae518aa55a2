"""Tests of workbench.runs.run: Channel and Run."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.errors import InputError
from workbench.runs.run import Channel, Run, full_scale


def _run(n=1000, rate=100.0, **kw):
    data = np.vstack([np.arange(n, dtype=np.float64), np.ones(n)])
    return Run(data, rate, (Channel("vib", "m/s^2", 2.0), Channel("tacho", "V")), **kw)


def test_derived_values():
    run = _run(1000, 100.0)
    assert run.n_channels == 2
    assert run.n_samples == 1000
    assert run.duration_s == pytest.approx(10.0)  # 1000 samples / 100 Hz (arithmetic)
    assert run.nyquist_hz == pytest.approx(50.0)
    np.testing.assert_array_equal(run.time_s, np.arange(1000) / 100.0)  # numpy as reference
    assert run.channel_names == ("vib", "tacho")


def test_channel_physical_units_divide_by_sensitivity():
    run = _run(10)
    # sensitivity 2 raw units per m/s^2: physical = raw / 2 (definition in the module notes)
    np.testing.assert_allclose(run.channel("vib"), np.arange(10) / 2.0)
    np.testing.assert_allclose(run.channel(2), np.ones(10))


def test_channel_returns_a_new_array():
    run = _run(10)
    x = run.channel("tacho")
    x[:] = 7.0
    np.testing.assert_array_equal(run.data[1], np.ones(10))


def test_integer_data_are_fractions_of_full_scale():
    codes = np.array([[-32768, 0, 16384, 32767]], dtype=np.int16)
    run = Run(codes, 10.0, ["a"])
    # int16 full scale is 2**15 = 32768 (PCM convention, common practice, no source)
    np.testing.assert_allclose(run.channel(1), [-1.0, 0.0, 0.5, 32767 / 32768])
    assert full_scale(np.int32) == 2.0**31
    assert full_scale(np.float32) == 1.0
    with pytest.raises(InputError, match="dtype uint8 is not supported"):
        full_scale(np.uint8)


def test_channel_index_forms():
    run = _run(5)
    assert run.channel_index(1) == 0
    assert run.channel_index("2") == 1
    assert run.channel_index("tacho") == 1
    with pytest.raises(InputError, match=r"channel 3 is out of range.*1='vib', 2='tacho'"):
        run.channel_index(3)
    with pytest.raises(InputError, match=r"channel 0 is out of range"):
        run.channel_index("0")
    with pytest.raises(InputError, match=r"channel 'speed' not found; available: 1='vib'"):
        run.channel("speed")
    with pytest.raises(InputError, match="not found"):
        run.channel_index(True)


def test_tacho_is_stored_as_a_name():
    assert _run(5, tacho=2).tacho == "tacho"
    assert _run(5, tacho="2").tacho_index == 1
    assert _run(5, tacho="tacho").tacho == "tacho"
    assert _run(5).tacho_index is None
    with pytest.raises(InputError, match="not found"):
        _run(5, tacho="rpm")


def test_one_dimensional_data_is_one_channel_view():
    x = np.arange(6.0)
    run = Run(x, 2.0, ["a"])
    assert run.data.shape == (1, 6)
    assert np.shares_memory(run.data, x)


@pytest.mark.parametrize(
    ("kw", "match"),
    [
        ({"data": [[1.0]]}, "must be a numpy array"),
        ({"data": np.zeros((1, 2, 3))}, r"shape \(1, 2, 3\)"),
        ({"data": np.zeros((1, 3), dtype=np.uint8)}, "dtype uint8"),
        ({"rate_hz": 0.0}, r"^rate_hz = 0\.0: must be a positive, finite sample rate \(Hz\)$"),
        ({"rate_hz": float("nan")}, "rate_hz = nan: must be a positive"),
        ({"rate_hz": True}, "rate_hz = true: must be a positive"),
        ({"channels": "a"}, "sequence of Channel"),
        ({"channels": ["a", "b"]}, "2 channel.s. given for data with 1 rows"),
        ({"data": np.zeros((2, 3)), "channels": ["a", "a"]}, "repeated: a"),
        ({"pulses_per_rev": 0}, "pulses_per_rev = 0: must be a positive integer"),
        ({"pulses_per_rev": 2.0}, r"pulses_per_rev = 2\.0: must be a positive integer \(.*; got a number\)"),
        ({"pulses_per_rev": 60, "missing_pulses": 60}, "missing_pulses = 60: must be an integer from 0 to 59"),
        ({"missing_pulses": -1}, "missing_pulses = -1: must be an integer >= 0"),
        ({"log": [("only", "two", "three", "four")]}, "log entry"),
    ],
)
def test_run_validation(kw, match):
    args = {"data": np.zeros((1, 3)), "rate_hz": 10.0, "channels": ["a"]}
    args.update(kw)
    with pytest.raises(InputError, match=match):
        Run(**args)


@pytest.mark.parametrize(
    ("kw", "match"),
    [
        ({"name": ""}, r'Channel: name = "": must be a non-empty string'),
        ({"name": 3}, "Channel: name = 3: must be"),
        ({"unit": None}, "unit = None: must be a string"),
        ({"sensitivity": 0}, r"sensitivity = 0: must be a positive number \(raw units per physical unit; > 0\)"),
        ({"sensitivity": float("inf")}, "sensitivity = inf: must be"),
        ({"sensitivity": "1"}, r'sensitivity = "1": must be a positive number \(raw units per physical unit; '
                                   r'got a string\)'),
    ],
)
def test_channel_validation(kw, match):
    args = {"name": "a"}
    args.update(kw)
    with pytest.raises(InputError, match=match):
        Channel(**args)


def test_run_is_frozen_and_data_not_copied():
    data = np.zeros((1, 4))
    run = Run(data, 1.0, ["a"])
    assert run.data is data
    with pytest.raises(AttributeError):
        run.rate_hz = 2.0  # type: ignore[misc]


def test_with_log_appends_and_shares_data():
    run = _run(5)
    r2 = run.with_log("highpass", {"cutoff_hz": 2.0})
    r3 = r2.with_log(("2024-01-01T00:00:00+00:00", "trim", {"start_s": 1.0}))
    r4 = r3.with_log(("scale", {"factor": 2}))
    assert run.log == ()
    assert [e[1] for e in r4.log] == ["highpass", "trim", "scale"]
    assert r4.log[0][2] == {"cutoff_hz": 2.0}
    assert r4.log[1][0] == "2024-01-01T00:00:00+00:00"
    assert r4.log[0][0][:2] == "20" and "T" in r4.log[0][0]  # ISO 8601 date-time
    assert r4.data is run.data
    with pytest.raises(InputError, match="not both"):
        run.with_log(("a", {}), {"b": 1})
    with pytest.raises(InputError, match="log entry = 5: must be"):
        run.with_log(5)


def test_iter_chunks_validation():
    run = _run(10)
    with pytest.raises(InputError, match="chunk_samples = 0: must be a positive integer"):
        list(run.iter_chunks(1, 0))
    with pytest.raises(InputError, match="overlap = 4: must be an integer from 0 to 3"):
        list(run.iter_chunks(1, 4, overlap=4))


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 300), chunk=st.integers(1, 64), overlap_frac=st.floats(0, 0.99))
def test_iter_chunks_cover_the_channel(n, chunk, overlap_frac):
    # Property: chunks start at multiples of (chunk - overlap), each is the channel's slice,
    # and together they reach the last sample exactly once at the end.
    overlap = min(int(overlap_frac * chunk), chunk - 1)
    run = Run(np.arange(n, dtype=np.float64).reshape(1, -1), 1.0, [Channel("a", "", 4.0)])
    expected = np.arange(n) / 4.0
    chunks = list(run.iter_chunks("a", chunk, overlap=overlap))
    step = chunk - overlap
    for k, c in enumerate(chunks):
        assert c.dtype == np.float64
        np.testing.assert_array_equal(c, expected[k * step:k * step + chunk])
    assert chunks[-1][-1] == expected[-1]
    assert len(chunks) == 1 or (len(chunks) - 2) * step + chunk < n


def test_repr_mentions_shape_and_rate():
    text = repr(_run(100, 50.0, tacho="tacho"))
    assert "2 channels" in text and "100 samples at 50 Hz" in text and "tacho='tacho'" in text
