"""Fold map and collisions, checked against intervals derived by hand.

The folding rule used for the hand derivations: with Nyquist fN = rate/2, a line at f in zone
floor(f/fN) shows at |f - rate*round(f/rate)| (common practice, no source; REFERENCES.md).
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import signal

from workbench.errors import InputError
from workbench.machine import machine_from_dict
from workbench.sampling import find_collisions, fold_map

from builders import linear_plan, one_shaft_machine


def _machine(order=10.0, level_db=0.0, extra=()):
    orders, tables = [{"name": "probe", "order": order, "level_db": level_db}], {}
    for table, entry in extra:
        (orders if table == "order" else tables.setdefault(table, [])).append(entry)
    return one_shaft_machine(*orders, name="test rig", **tables)


def _plan(bands, *, filt=None, threshold=-60.0, start=600.0, end=3600.0, rates=(1000.0,)):
    return linear_plan(start, end, 10.0, rates, bands=bands, threshold_db=threshold,
                       **(filt or {"filter": "none"}))


def test_fold_map_shapes_and_worked_values():
    # Order 10 at 600..3600 rpm is 100..600 Hz; at 1000 S/s, 600 Hz shows at 400 Hz in zone 1
    # (folding rule, common practice, no source).
    m = _machine()
    plan = _plan([{"name": "b", "hz": [420.0, 480.0]}])
    fm = fold_map(m, plan, 1000.0, n_speeds=301)
    assert fm.true_hz.shape == (len(m.lines()), 301)
    i = fm.names.index("probe order")
    assert fm.true_hz[i, -1] == pytest.approx(600.0)
    assert fm.apparent_hz[i, -1] == pytest.approx(400.0)
    assert fm.zone[i, -1] == 1
    assert fm.zone[i, 0] == 0
    assert fm.apparent_order[i, -1] == pytest.approx(400.0 / 60.0)
    frame = fm.to_frame()
    assert len(frame) == fm.true_hz.size
    assert set(frame.columns) >= {"line", "rpm", "apparent_hz", "zone", "residual_db"}


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_collision_interval_matches_hand_derivation_no_filter(method):
    # Band 420-480 Hz, order 10, rate 1000 S/s, no filter.
    # Direct (overlap): 10 f in [420, 480] -> f in [42, 48] Hz -> 2520..2880 rpm.
    # Folded (collision): 1000 - 10 f in [420, 480] -> 10 f in [520, 580] -> 3120..3480 rpm.
    # (derived by hand from the folding rule; common practice, no source)
    m = _machine()
    plan = _plan([{"name": "b", "hz": [420.0, 480.0]}])
    table = find_collisions(m, plan, 1000.0, n_speeds=97, method=method)  # coarse grid on purpose
    coll = table[table["kind"] == "collision"]
    over = table[table["kind"] == "overlap"]
    assert len(coll) == 1 and len(over) == 1
    c = coll.iloc[0]
    assert c["line"] == "probe order" and c["band"] == "b" and c["zone"] == 1
    assert c["rpm_min"] == pytest.approx(3120.0, abs=1e-4)
    assert c["rpm_max"] == pytest.approx(3480.0, abs=1e-4)
    assert c["apparent_hz_min"] == pytest.approx(420.0, abs=1e-3)
    assert c["apparent_hz_max"] == pytest.approx(480.0, abs=1e-3)
    assert c["residual_db"] == pytest.approx(0.0)
    o = over.iloc[0]
    assert o["rpm_min"] == pytest.approx(2520.0, abs=1e-4)
    assert o["rpm_max"] == pytest.approx(2880.0, abs=1e-4)


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_collision_interval_cut_by_filter_threshold(method):
    # 4th-order Butterworth, -3 dB at 0.4 x rate = 400 Hz: attenuation 10 log10(1 + (f/400)^8)
    # (Butterworth magnitude, REFERENCES.md).  Threshold -10 dB: the residual falls below it at
    # (f/400)^8 = 9, f = 400 * 9**(1/8) = 526.44 Hz -> 3158.6 rpm.  The folded band interval
    # 3120..3480 rpm is cut to 3120..3158.6 rpm (derived by hand).
    m = _machine()
    plan = _plan(
        [{"name": "b", "hz": [420.0, 480.0]}],
        filt={"filter": "butterworth", "filter_order": 4, "cutoff": 0.4},
        threshold=-10.0,
    )
    table = find_collisions(m, plan, 1000.0, n_speeds=61, method=method)
    coll = table[table["kind"] == "collision"]
    assert len(coll) == 1
    f_edge = 400.0 * 9.0 ** (1.0 / 8.0)
    assert coll.iloc[0]["rpm_min"] == pytest.approx(3120.0, abs=1e-3)
    assert coll.iloc[0]["rpm_max"] == pytest.approx(f_edge / 10.0 * 60.0, abs=1e-3)
    # The residual reported is the highest within the interval: at 520 Hz true.
    expected = -10.0 * np.log10(1.0 + (520.0 / 400.0) ** 8)
    assert coll.iloc[0]["residual_db"] == pytest.approx(expected, abs=1e-6)
    # Independent check of that attenuation with scipy.signal.freqs on the same prototype
    # (scipy as a general-purpose reference library).
    b, a = signal.butter(4, 2 * np.pi * 400.0, analog=True)
    _, h = signal.freqs(b, a, worN=[2 * np.pi * 520.0])
    assert coll.iloc[0]["residual_db"] == pytest.approx(20 * np.log10(abs(h[0])), abs=1e-6)


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_order_band_and_zone_split(method):
    # Order band 6-7 orders.  Line order 10 at rate 1000: folded apparent order is
    # (1000 - 10 f)/f = 1000/f - 10 for zone 1 (f between 50 and 100 Hz):
    # in [6, 7] -> f in [1000/17, 1000/16] = [58.82, 62.5] Hz -> 3529.4..3750 rpm.
    # With the profile to 3600 rpm the interval is 3529.4..3600 (derived by hand).
    m = _machine()
    plan = _plan([{"name": "ob", "orders": [6.0, 7.0]}])
    table = find_collisions(m, plan, 1000.0, n_speeds=50, method=method)
    coll = table[table["kind"] == "collision"]
    assert len(coll) == 1
    assert coll.iloc[0]["rpm_min"] == pytest.approx(1000.0 / 17.0 * 60.0, abs=1e-3)
    assert coll.iloc[0]["rpm_max"] == pytest.approx(3600.0)


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_interval_split_at_zone_edge(method):
    # A band spanning Nyquist: 450-550 Hz "band" in a 1000 S/s plan can only hold apparent
    # frequencies up to 500 Hz; the line order 10 is inside from 450 Hz true (direct, 2700 rpm)
    # to 500 Hz (Nyquist, 3000 rpm), then folded from 500 Hz true up to 550 Hz true (3300 rpm),
    # where the apparent frequency 1000 - 550 = 450 leaves the band (derived by hand).
    m = _machine()
    plan = _plan([{"name": "b", "hz": [450.0, 550.0]}])
    table = find_collisions(m, plan, 1000.0, n_speeds=77, method=method).sort_values("rpm_min")
    assert list(table["kind"]) == ["overlap", "collision"]
    assert table.iloc[0]["rpm_min"] == pytest.approx(2700.0, abs=1e-4)
    assert table.iloc[0]["rpm_max"] == pytest.approx(3000.0, abs=1e-4)
    assert table.iloc[1]["rpm_min"] == pytest.approx(3000.0, abs=1e-4)
    assert table.iloc[1]["rpm_max"] == pytest.approx(3300.0, abs=1e-4)
    assert table.iloc[1]["zone"] == 1


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_around_band_moves_with_speed_and_ignores_its_own_line(method):
    # Band around the probe line itself (order 10 +- 5 %): the probe is not reported against
    # its own band.  A second order at 29.5 folds at 1000 S/s in zone 1 for 1017..2034 rpm;
    # apparent order (1000/f) - 29.5 lies within 10 * (1 +- 0.025) when 1000/f in
    # [39.25, 39.75] -> f in [25.157, 25.478] Hz -> 1509.4..1528.7 rpm (derived by hand).
    m = _machine(extra=[("order", {"name": "other", "shaft": "input", "order": 29.5})])
    plan = _plan([{"name": "around", "around": "probe order", "width_pct": 5.0}], start=600.0, end=2000.0)
    table = find_collisions(m, plan, 1000.0, n_speeds=200, method=method)
    assert "probe order" not in set(table["line"])
    coll = table[table["kind"] == "collision"]
    assert len(coll) == 1
    assert coll.iloc[0]["line"] == "other order"
    assert coll.iloc[0]["rpm_min"] == pytest.approx(1000.0 / 39.75 * 60.0, abs=1e-3)
    assert coll.iloc[0]["rpm_max"] == pytest.approx(1000.0 / 39.25 * 60.0, abs=1e-3)


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_fixed_line_does_not_move(method):
    # A fixed 700 Hz line at 1000 S/s shows at 300 Hz in zone 1 at every speed (folding rule).
    m = _machine(extra=[("line", {"name": "hum", "hz": 700.0})])
    plan = _plan([{"name": "b", "hz": [290.0, 310.0]}])
    table = find_collisions(m, plan, 1000.0, n_speeds=50, method=method)
    coll = table[table["line"] == "hum line"]
    assert len(coll) == 1
    assert coll.iloc[0]["rpm_min"] == pytest.approx(600.0)
    assert coll.iloc[0]["rpm_max"] == pytest.approx(3600.0)
    assert coll.iloc[0]["apparent_hz_min"] == pytest.approx(300.0)


@pytest.mark.parametrize("method", ["exact", "grid"])
def test_collisions_sorted_by_residual(method):
    m = _machine(level_db=-30.0, extra=[("order", {"name": "loud", "shaft": "input", "order": 9.0})])
    plan = _plan([{"name": "b", "hz": [380.0, 480.0]}])
    table = find_collisions(m, plan, 1000.0, method=method)
    assert list(table["residual_db"]) == sorted(table["residual_db"], reverse=True)


def test_bad_rate_and_grid():
    m = _machine()
    plan = _plan([{"name": "b", "hz": [420.0, 480.0]}])
    with pytest.raises(InputError, match=r"^rate_hz = 0\.0: must be a positive, finite sample "
                                         r"rate \(Hz\)$"):
        fold_map(m, plan, 0.0)
    with pytest.raises(InputError, match="n_speeds = 1: must be an integer >= 2"):
        fold_map(m, plan, 1000.0, n_speeds=1)


def test_folded_line_seen_by_numpy_fft_where_fold_map_says():
    # Independent check (numpy as a general-purpose reference library): sample a sinusoid of
    # the line's true frequency at a given speed; the FFT peak lands at the fold map's apparent
    # frequency within one bin.
    m = _machine(order=37.0)
    plan = _plan([{"name": "b", "hz": [10.0, 20.0]}])
    rate = 1000.0
    fm = fold_map(m, plan, rate, rpm=[1500.0])
    i = fm.names.index("probe order")
    f_true = fm.true_hz[i, 0]
    n = 4000
    t = np.arange(n) / rate
    spec = np.abs(np.fft.rfft(np.sin(2 * np.pi * f_true * t) * np.hanning(n)))
    peak_hz = np.argmax(spec) * rate / n
    assert abs(peak_hz - fm.apparent_hz[i, 0]) <= rate / n


@settings(max_examples=80, deadline=None, derandomize=True)
@given(
    orders=st.lists(st.floats(0.5, 60.0), min_size=1, max_size=6),
    rate=st.sampled_from([1000.0, 2560.0, 5120.0]),
    lo=st.floats(0.0, 900.0),
    width=st.floats(5.0, 300.0),
    n_filter=st.integers(2, 8),
    kind=st.sampled_from(["butterworth", "bessel", "digital", "ideal"]),
    thr=st.floats(-80.0, -5.0),
)
def test_exact_and_grid_methods_agree(orders, rate, lo, width, n_filter, kind, thr):
    # Two independent computations of the same intervals: closed form against a fine speed
    # grid with refined edges.  Intervals wider than a few grid steps must match to 1e-6 rpm.
    d = {
        "machine": {"name": "rig", "reference": "input"},
        "shaft": [{"name": "input"}],
        "order": [{"name": f"o{i}", "shaft": "input", "order": o, "level_db": -3.0 * i} for i, o in enumerate(orders)],
    }
    m = machine_from_dict(d)
    plan = _plan([{"name": "hz", "hz": [lo, lo + width]}, {"name": "ord", "orders": [3.0, 3.0 + width / 100.0]}],
                 filt={"butterworth": {"filter": "butterworth", "filter_order": n_filter, "cutoff": 0.4},
                       "bessel": {"filter": "bessel", "filter_order": n_filter, "cutoff": 0.3},
                       "digital": {"filter": "digital", "stopband_db": 40.0 + 5 * n_filter},
                       "ideal": {"filter": "ideal", "cutoff": 0.45}}[kind],
                 threshold=thr, rates=(rate,))
    exact = find_collisions(m, plan, rate, method="exact")
    grid = find_collisions(m, plan, rate, method="grid", n_speeds=4000)
    step = (plan.speed.rpm_max - plan.speed.rpm_min) / 3999
    wide = exact[(exact["rpm_max"] - exact["rpm_min"]) > 4 * step]
    key = ["line", "band", "zone"]
    for row in wide.itertuples(index=False):
        match = grid[(grid["line"] == row.line) & (grid["band"] == row.band) & (grid["zone"] == row.zone)
                     & (grid["rpm_max"] >= row.rpm_min) & (grid["rpm_min"] <= row.rpm_max)]
        assert len(match) == 1, (row, grid[key])
        g = match.iloc[0]
        assert g["rpm_min"] == pytest.approx(row.rpm_min, abs=1e-6)
        assert g["rpm_max"] == pytest.approx(row.rpm_max, abs=1e-6)
        assert g["residual_db"] == pytest.approx(row.residual_db, abs=1e-6)
        assert g["apparent_hz_min"] == pytest.approx(row.apparent_hz_min, abs=1e-6)
    # Everything the grid sees, the closed form sees too (but a band edge merely touched at a
    # single speed, which the grid lists as an interval of zero width).
    for row in grid[grid["rpm_max"] > grid["rpm_min"]].itertuples(index=False):
        assert ((exact["line"] == row.line) & (exact["band"] == row.band) & (exact["zone"] == row.zone)).any()


def test_exact_method_needs_a_monotone_filter():
    m = _machine()
    plan = _plan([{"name": "b", "hz": [420.0, 480.0]}],
                 filt={"filter": "elliptic", "filter_order": 6, "cutoff": 0.4, "stopband_db": 80.0})
    with pytest.raises(InputError, match="use method 'grid'"):
        find_collisions(m, plan, 1000.0, method="exact")
    with pytest.raises(InputError, match='method = "fast": must be one of "auto", "exact", "grid"'):
        find_collisions(m, plan, 1000.0, method="fast")
    # auto falls to the grid for this filter, and finds the folded interval.
    table = find_collisions(m, plan, 1000.0)
    assert (table["kind"] == "collision").any()


def test_absurd_orders_fall_back_to_the_grid_with_a_warning():
    # An order of 1e9 at 1000 S/s crosses about 1e11 Nyquist zones: the closed form would need
    # a segment per zone, so "auto" warns and uses the grid; "exact" refuses.
    from workbench.errors import FoldlineWarning

    m = _machine(order=1e9)
    plan = _plan([{"name": "b", "hz": [420.0, 480.0]}])
    with pytest.warns(FoldlineWarning, match="Nyquist zones"):
        find_collisions(m, plan, 1000.0, n_speeds=50)
    with pytest.raises(InputError, match="use method 'grid'"):
        find_collisions(m, plan, 1000.0, method="exact")
