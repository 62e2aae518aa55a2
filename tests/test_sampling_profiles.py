"""Tests of workbench.sampling.profiles: speed profiles and speed tables."""

import dataclasses

import numpy as np
import pytest
import scipy.integrate
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from workbench.errors import InputError
from workbench.sampling import SpeedProfile, read_speed_table

RUNUP = SpeedProfile("linear", 600.0, 3600.0, 60.0)
COAST = SpeedProfile("exponential", 3000.0, 300.0, 40.0)
TABLE = SpeedProfile("table", table_time_s=[0, 10, 30, 40], table_rpm=[500, 3000, 3000, 1000])


def _quad_revs(profile, t):
    """Revolutions by numerical quadrature of rpm/60 (scipy as reference library)."""
    points = [p for p in (profile.table_time_s or ()) if 0 < p < t]
    value, _ = scipy.integrate.quad(lambda s: float(profile.rpm_at(s)) / 60.0, 0.0, t,
                                    points=points or None, epsabs=1e-11, epsrel=1e-12)
    return value


def test_linear_values():
    assert RUNUP.rpm_at(0.0) == 600.0 and RUNUP.rpm_at(60.0) == 3600.0
    np.testing.assert_allclose(RUNUP.rpm_at([15.0, 30.0]), [1350.0, 2100.0])
    assert RUNUP.time_at(2100.0) == pytest.approx(30.0)
    assert RUNUP.sweep_rate_rpm_per_s(12.0) == 50.0
    assert RUNUP.max_sweep_rate_rpm_per_s == 50.0
    # Mean speed 2100 rev/min for one minute: 2100 revolutions (arithmetic).
    assert RUNUP.shaft_angle_rev(60.0) == pytest.approx(2100.0)
    assert RUNUP.revolutions == pytest.approx(2100.0)
    assert (RUNUP.rpm_min, RUNUP.rpm_max, RUNUP.is_monotonic) == (600.0, 3600.0, True)


def test_exponential_values():
    # rpm(t) = start (end/start)^(t/T): the midpoint is the geometric mean.
    assert COAST.rpm_at(20.0) == pytest.approx(np.sqrt(3000.0 * 300.0))
    assert COAST.rpm_at(40.0) == pytest.approx(300.0)
    assert COAST.time_at(np.sqrt(3000.0 * 300.0)) == pytest.approx(20.0)
    # Derivative of start * exp(k t) is k * rpm, k = ln(end/start)/T; negative on a coast-down.
    k = np.log(0.1) / 40.0
    assert COAST.sweep_rate_rpm_per_s(10.0) == pytest.approx(k * COAST.rpm_at(10.0))
    assert COAST.max_sweep_rate_rpm_per_s == pytest.approx(-k * 3000.0)
    assert (COAST.rpm_min, COAST.rpm_max) == (300.0, 3000.0)


def test_table_values():
    np.testing.assert_allclose(TABLE.rpm_at([0, 5, 20, 35, 40]), [500, 1750, 3000, 2000, 1000])
    assert (TABLE.start_rpm, TABLE.end_rpm, TABLE.duration_s) == (500.0, 1000.0, 40.0)
    # Later segment's slope at a breakpoint; last segment's at the end.
    np.testing.assert_allclose(TABLE.sweep_rate_rpm_per_s([0, 5, 10, 30, 40]),
                               [250, 250, 0, -200, -200])
    assert TABLE.max_sweep_rate_rpm_per_s == 250.0
    assert not TABLE.is_monotonic
    # Trapezoids: 10 s at mean 1750, 20 s at 3000, 10 s at mean 2000 rev/min.
    assert TABLE.revolutions == pytest.approx((10 * 1750 + 20 * 3000 + 10 * 2000) / 60.0)


@pytest.mark.parametrize("profile", [RUNUP, COAST, TABLE,
                                     SpeedProfile("linear", 1000.0, 1000.0, 5.0),
                                     SpeedProfile("exponential", 800.0, 800.0, 5.0)])
def test_shaft_angle_matches_quadrature(profile):
    # scipy.integrate.quad of rpm/60 as a general-purpose reference.
    for t in np.linspace(0.0, profile.duration_s, 7):
        assert profile.shaft_angle_rev(t) == pytest.approx(_quad_revs(profile, t), rel=1e-9,
                                                           abs=1e-9)


@pytest.mark.parametrize("profile", [RUNUP, COAST, TABLE])
def test_sweep_rate_matches_numerical_derivative(profile):
    # numpy.gradient of rpm_at on a fine grid as a reference, away from table breakpoints.
    t = np.linspace(0.0, profile.duration_s, 4001)
    slope = np.gradient(profile.rpm_at(t), t, edge_order=2)
    keep = np.ones(t.size, bool)
    for p in profile.table_time_s or ():
        keep &= np.abs(t - p) > 2 * (t[1] - t[0])
    np.testing.assert_allclose(profile.sweep_rate_rpm_per_s(t)[keep], slope[keep], rtol=1e-5,
                               atol=1e-6)


def test_decreasing_table_time_at():
    p = SpeedProfile("table", table_time_s=[0, 2, 5], table_rpm=[3000, 2000, 500])
    np.testing.assert_allclose(p.time_at([3000, 2500, 2000, 500]), [0, 1, 2, 5])


def test_shapes_and_inputs_not_mutated():
    t = np.array([[0.0, 10.0], [20.0, 60.0]])
    assert RUNUP.rpm_at(t).shape == (2, 2)
    assert RUNUP.shaft_angle_rev(t).shape == (2, 2)
    assert RUNUP.sweep_rate_rpm_per_s(t).shape == (2, 2)
    assert TABLE.sweep_rate_rpm_per_s(t[:, :1] / 2).shape == (2, 1)
    np.testing.assert_array_equal(t, [[0.0, 10.0], [20.0, 60.0]])
    assert np.ndim(RUNUP.rpm_at(1.0)) == 0


def test_rpm_grid():
    np.testing.assert_allclose(RUNUP.rpm_grid(4), [600, 1600, 2600, 3600])
    np.testing.assert_allclose(TABLE.rpm_grid(2), [500, 3000])
    for bad, shown in ((1, "1"), (2.5, "2.5"), ("3", '"3"'), (True, "true")):
        with pytest.raises(InputError, match=f"^n = {shown}: must be an integer >= 2"):
            RUNUP.rpm_grid(bad)


def test_time_at_needs_monotonic():
    with pytest.raises(InputError, match="time_at needs a profile whose speed rises or falls"):
        TABLE.time_at(1000.0)
    with pytest.raises(InputError, match="time_at needs a profile"):
        SpeedProfile("linear", 1000.0, 1000.0, 5.0).time_at(1000.0)


def test_out_of_range_arguments():
    with pytest.raises(InputError, match="t_s = 61.0: times must lie within the profile, 0 to 60 s"):
        RUNUP.rpm_at(61.0)
    with pytest.raises(InputError, match="t_s = -1.0: times must lie within"):
        RUNUP.shaft_angle_rev(-1.0)
    with pytest.raises(InputError, match="t_s = nan: times must lie within"):
        RUNUP.sweep_rate_rpm_per_s(np.nan)
    with pytest.raises(InputError, match='t_s = "soon": must be numbers'):
        RUNUP.rpm_at("soon")
    with pytest.raises(InputError, match="rpm = 100.0: speeds must lie within the profile, 600 to 3600"):
        RUNUP.time_at(100.0)
    with pytest.raises(InputError, match='rpm = "fast": must be numbers'):
        RUNUP.time_at("fast")


def test_replace_keeps_table_profile_valid():
    again = dataclasses.replace(TABLE)
    assert again == TABLE
    with pytest.raises(dataclasses.FrozenInstanceError):
        TABLE.kind = "linear"


@pytest.mark.parametrize(
    "args, kwargs, message",
    [
        (("ramp", 1, 2, 3), {}, 'kind = "ramp": must be one of "linear", "exponential", "table"'),
        (("linear", None, 2, 3), {}, "start_rpm: is required by profile kind 'linear'"),
        (("linear", 1, None, 3), {}, "end_rpm: is required"),
        (("linear", 1, 2, None), {}, "duration_s: is required"),
        (("linear", -1, 2, 3), {}, "start_rpm = -1: must be at least 0"),
        (("linear", 1, np.inf, 3), {}, "end_rpm = inf: must be a finite number"),
        (("exponential", 0, 2, 3), {}, "start_rpm = 0: must be above 0"),
        (("linear", 1, 2, 0), {}, "duration_s = 0: must be above 0"),
        (("linear", 1, 2, "3"), {}, 'duration_s = "3": must be a finite number'),
        (("linear", 1, 2, 3), {"table_rpm": [1, 2]}, r"table_rpm = \[1, 2\]: is only used by profile "
                                                     "kind 'table'"),
        (("table",), {"table_rpm": [1, 2]}, "table_time_s: is required by profile kind"),
        (("table",), {"table_time_s": [0, 1]}, "table_rpm: is required"),
        (("table",), {"table_time_s": [0], "table_rpm": [1]}, "must hold at least 2 values"),
        (("table",), {"table_time_s": [0, 1, 2], "table_rpm": [1, 2]},
         r"table_rpm = \[1\.0, 2\.0\]: must have one speed per time \(3\), got 2"),
        (("table",), {"table_time_s": [1, 2], "table_rpm": [1, 2]},
         r"table_time_s = \[1\.0, 2\.0\]: the first time must be 0 s"),
        (("table",), {"table_time_s": [0, 2, 2], "table_rpm": [1, 2, 3]},
         r"table_time_s = \[0\.0, 2\.0, 2\.0\]: row 3: times must increase strictly"),
        (("table",), {"table_time_s": [0, 2], "table_rpm": [1, -2]},
         r"table_rpm = \[1\.0, -2\.0\]: row 2: speeds must not be negative"),
        (("table", 5.0), {"table_time_s": [0, 2], "table_rpm": [1, 2]},
         r"start_rpm = 5\.0: follows from the table of a 'table' profile \(1\)"),
        (("table",), {"table_time_s": [0, 2], "table_rpm": [1, 2], "duration_s": 3},
         r"duration_s = 3: follows from the table of a 'table' profile \(2\)"),
    ],
)
def test_validation(args, kwargs, message):
    with pytest.raises(InputError, match=message):
        SpeedProfile(*args, **kwargs)


# -- speed table files -----------------------------------------------------------------------
def test_read_speed_table(tmp_path):
    path = tmp_path / "speed.csv"
    path.write_text("time_s, rpm\n0,600\n10.5,3000\n20,1000\n\n")
    time, rpm = read_speed_table(path)
    np.testing.assert_array_equal(time, [0.0, 10.5, 20.0])
    np.testing.assert_array_equal(rpm, [600.0, 3000.0, 1000.0])
    path.write_text("rpm,time_s\n600,0\n3000,1\n")
    time, rpm = read_speed_table(path)
    np.testing.assert_array_equal(time, [0.0, 1.0])


@pytest.mark.parametrize(
    "text, message",
    [
        ("time_s,rpm\n0,600\n10,fast\n", 'speed.csv: line 3: rpm = "fast": must be a finite number'),
        ("time_s,rpm\n0,600\n\n10,700\n", 'speed.csv: line 3: time_s = "": must be a finite number'),
        ("time_s,rpm\n0,600\n10,\n", 'line 3: rpm = "": must be a finite number'),
        ("time_s,rpm\n0,600\n10,inf\n", 'line 3: rpm = "inf": must be a finite number'),
        ("time_s,speed\n0,600\n10,700\n", "speed.csv: header: unknown column 'speed'"),
        ("time_s\n0\n10\n", "header: columns time_s; a speed table has the columns time_s,rpm"),
        ("time_s,rpm\n0,600\n", "needs at least two rows, got 1"),
        ("", "not a readable CSV speed table"),
        ("time_s,rpm\n0,600\n10,700\n10,800\n", "line 4: time_s = 10: times must increase strictly; the line before gives 10"),
        ("time_s,rpm\n0,600\n10,-700\n", "line 3: rpm = -700: speeds must not be negative"),
    ],
)
def test_read_speed_table_errors(tmp_path, text, message):
    path = tmp_path / "speed.csv"
    path.write_text(text)
    with pytest.raises(InputError, match=message):
        read_speed_table(path)


def test_read_speed_table_missing_and_binary(tmp_path):
    with pytest.raises(InputError, match="nothing.csv: speed table not found"):
        read_speed_table(tmp_path / "nothing.csv")
    with pytest.raises(InputError, match="cannot read the speed table"):
        read_speed_table(tmp_path)  # a folder
    path = tmp_path / "bin.csv"
    path.write_bytes(b"\xff\xfe\x00\x81time")
    with pytest.raises(InputError, match="bin.csv"):
        read_speed_table(path)


# -- properties ----------------------------------------------------------------------------
speeds = st.floats(min_value=1.0, max_value=30000.0)
durations = st.floats(min_value=0.1, max_value=1000.0)


@settings(max_examples=200, deadline=None)
@given(st.sampled_from(["linear", "exponential"]), speeds, speeds, durations,
       st.floats(0.0, 1.0))
def test_property_time_at_inverts_rpm_at(kind, start, end, duration, frac):
    assume(abs(end - start) >= 1e-3 * max(start, end))  # constant speed is tested above
    p = SpeedProfile(kind, start, end, duration)
    t = frac * duration
    assert p.time_at(p.rpm_at(t)) == pytest.approx(t, abs=1e-7 * duration)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.floats(0.0, 10000.0), min_size=2, max_size=8),
       st.lists(st.floats(0.01, 10.0), min_size=7, max_size=7))
def test_property_table_shaft_angle_non_decreasing_and_additive(rpm, steps):
    time = np.concatenate(([0.0], np.cumsum(steps[: len(rpm) - 1])))
    p = SpeedProfile("table", table_time_s=time, table_rpm=rpm)
    t = np.linspace(0.0, p.duration_s, 101)
    revs = p.shaft_angle_rev(t)
    assert np.all(np.diff(revs) >= -1e-9 * (1 + revs[-1]))
    # Total equals the trapezoid rule on the table itself (exact for piecewise linear speed).
    expect = np.sum(np.diff(time) * (np.asarray(rpm[1:]) + rpm[:-1]) / 2) / 60.0
    assert revs[-1] == pytest.approx(expect, rel=1e-9, abs=1e-9)
