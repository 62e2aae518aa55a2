"""Results an analyst reads at a glance: measurement first, resolution-aware identification,
unmatched lines listed.

Truth comes from analytic signals: the simulator writes every line of a machine as a sinusoid
of peak amplitude 10**(level_db / 20) (0 dB = 1 unit peak; workbench.runs.simulate), here with
no resonance gain and a filter far above the lines, so each line's true amplitude is known.
"""

import json

import numpy as np
import pytest

from workbench.cli.main import main
from workbench.machine import machine_from_dict
from workbench.runs import simulate_run
from workbench.runs.analysis import track_run
from workbench.sampling import plan_from_dict

from builders import linear_plan, one_shaft_machine

RATE = 1000.0


def _machine(extra_orders=(), extra_lines=()):
    return one_shaft_machine({"name": "low speed", "order": 0.075}, {"name": "pinion", "order": 5.03},
                             *extra_orders, shaft="motor", name="slow rig", line=extra_lines)


def _plan():
    return linear_plan(600.0, 1500.0, 16.0, RATE, filter="butterworth", filter_order=4, cutoff=0.45,
                       threshold_db=-60.0)


@pytest.fixture(scope="module")
def unmodelled_run():
    # The run holds an order 3.3 and a fixed 180 Hz line that the analyst's machine file lacks
    # (they never cross during the run-up: 180 Hz is order 3.3 only at 3273 rpm).
    truth = _machine(extra_orders=[{"name": "unknown", "shaft": "motor", "order": 3.3, "level_db": -6.0}],
                     extra_lines=[{"name": "hum", "hz": 180.0, "level_db": -12.0}])
    return simulate_run(truth, _plan(), RATE, seed=5, tacho_rise_s=2e-3, resonance_gain_db=0.0,
                        noise_db=-70.0)


@pytest.fixture(scope="module")
def tracked(unmodelled_run):
    # 16 revs per block: bins of 0.0625 orders
    return track_run(unmodelled_run, machine=_machine(), samples_per_rev=64, revs_per_block=16)


def test_resolution_rule_drops_the_0075_order_and_amplitudes_follow_the_spectrum(tracked):
    # 16 revs per block: bins of 0.0625 orders; two bins = 0.125 > 0.075, so the low-speed
    # shaft line cannot be resolved from DC and must be neither matched nor given an amplitude.
    a = tracked
    ident = a.identification
    assert ident.min_order == pytest.approx(0.125)
    assert "low speed order" not in set(ident.table["line"])
    assert ident.below_resolution == ("low speed order",)
    assert (ident.points["order"] >= 0.125).all()
    # Order 5.03 lies 0.48 bin off a bin centre (near the worst case of the Hann window's
    # scalloping loss, 1.42 dB: Harris 1978); the identified amplitude uses the order
    # spectrum's peak estimator, so it reads the true 1.0 (0 dB) within 2 %, where the bin
    # alone would read about 0.85.
    row = ident.table.set_index("line").loc["pinion order"]
    assert row["amplitude_max"] == pytest.approx(1.0, rel=0.02)
    bin_alone = np.nanmax(a.order_map.amplitude[:, np.argmin(np.abs(a.order_map.order - 5.03))])
    assert bin_alone < 0.9  # the estimator matters here: the test could fail without it
    peak = a.peaks.iloc[(a.peaks["order"] - 5.03).abs().argmin()]
    assert row["amplitude_max"] == pytest.approx(peak["amplitude"], rel=0.02)


def test_resolved_when_the_block_is_long_enough(unmodelled_run):
    # 64 revs per block: bins of 1/64 order, two bins = 0.031 < 0.075: now it is matched, and
    # at its true amplitude 1.0 (0 dB) within 5 %.
    a = track_run(unmodelled_run, machine=_machine(), samples_per_rev=64, revs_per_block=64, rf_map=False)
    t = a.identification.table.set_index("line")
    assert "low speed order" in t.index
    assert t.loc["low speed order", "amplitude_max"] == pytest.approx(1.0, rel=0.05)
    assert a.identification.below_resolution == ()


def test_unmodelled_lines_listed_as_unmatched(tracked):
    a = tracked
    um = a.unmatched
    assert um is a.identification.unmatched and len(um)
    orders = um[um["family"] == "order"]
    k = (orders["order"] - 3.3).abs().idxmin()
    got = orders.loc[k]
    # order 3.3 at -6 dB: 0.501 peak; seen over the whole run-up (600-1500 rpm), moving with speed
    assert got["order"] == pytest.approx(3.3, abs=0.02)
    assert bool(got["moves_with_speed"]) is True
    assert got["amplitude_max"] == pytest.approx(10 ** (-6 / 20), rel=0.05)
    assert got["rpm_min"] < 700 and got["rpm_max"] > 1400
    fixed = um[um["family"] == "fixed"]
    k = (fixed["hz"] - 180.0).abs().idxmin()
    hum = fixed.loc[k]
    # 180 Hz at -12 dB: 0.251 peak, a fixed line: its order falls from 18 to 7.2 over the run
    assert hum["hz"] == pytest.approx(180.0, abs=0.5)
    assert bool(hum["moves_with_speed"]) is False
    assert hum["amplitude_max"] == pytest.approx(10 ** (-12 / 20), rel=0.1)
    # the modelled lines are not listed as unmatched
    assert not ((orders["order"] - 5.03).abs() < 0.1).any()
    # and the JSON contract carries them
    rec = a.to_dict()["unmatched"]
    assert {r["id"] for r in rec} == set(um["id"])
    assert any(r["family"] == "order" and abs(r["order"] - 3.3) < 0.02 for r in rec)


def test_without_machine_every_measured_line_is_listed(unmodelled_run):
    a = track_run(unmodelled_run, samples_per_rev=64, revs_per_block=16, rf_map=False)
    assert a.identification is None
    orders = a.unmatched[a.unmatched["family"] == "order"]["order"].to_numpy()
    for want in (5.03, 3.3):
        assert np.min(np.abs(orders - want)) < 0.02
    assert "unmatched" in a.to_dict()


# -- figures: measurement first ----------------------------------------------------------------

def test_overlay_is_off_by_default_and_thin_when_on(tracked):
    from workbench.plots import plot_order_map, plot_frequency_map
    from workbench.plots.angle import OVERLAY_ALPHA

    m, a = _machine(), tracked
    fig = plot_order_map(a.order_map, lines=m.lines(), rate_hz=RATE, identification=a.identification,
                         title="Order map")
    ax = fig.axes[0]
    assert len(ax.lines) == 0                       # no predicted line drawn by default
    assert "overlaid" not in ax.get_title()
    fig = plot_order_map(a.order_map, lines=m.lines(), rate_hz=RATE, identification=a.identification,
                         title="Order map", overlay="matched")
    ax = fig.axes[0]
    assert len(ax.lines) > 0 and "overlaid" in ax.get_title()
    assert all(ln.get_linewidth() <= 0.6 and ln.get_alpha() <= OVERLAY_ALPHA for ln in ax.lines)
    fig = plot_frequency_map(a.rf_map, lines=m.lines(), rate_hz=RATE, title="rf")
    assert len(fig.axes[0].lines) == 0 and fig.axes[0].get_title() == "rf"


def test_track_command_default_overlay_none_and_unmatched_in_json(tmp_path, capsys):
    from workbench.runs import simulate_to_wav

    truth = _machine(extra_orders=[{"name": "unknown", "shaft": "motor", "order": 3.3, "level_db": -6.0}])
    run = simulate_to_wav(truth, _plan(), RATE, tmp_path / "r.wav", seed=2, tacho_rise_s=2e-3,
                          resonance_gain_db=0.0, duration_s=8.0)
    mfile = tmp_path / "m.toml"
    from workbench.machine import write_machine

    write_machine(_machine(), mfile)
    capsys.readouterr()
    assert main(["track", str(run), "--machine", str(mfile), "--samples-per-rev", "64", "--json",
                 "--out", str(tmp_path / "out")]) == 0
    got = json.loads(capsys.readouterr().out)
    assert any(r["family"] == "order" and abs(r["order"] - 3.3) < 0.03 for r in got["unmatched"])
    assert (tmp_path / "out" / "unmatched.csv").is_file()
    from workbench.cli.main import build_parser

    assert build_parser().parse_args(["track", "x.wav"]).overlay == "none"
    assert build_parser().parse_args(["report", "m", "p", "--out", "r.html"]).overlay == "none"


# -- overall level ------------------------------------------------------------------------------

def _two_orders(rate=2000.0, duration=20.0, a=(1.0, 0.5), k=(3.0, 11.0)):
    from workbench.angle import ShaftAngle

    t = np.arange(int(rate * duration)) / rate
    angle = ShaftAngle.from_speed_table([0.0, duration], [1200.0, 1800.0])
    revs = angle.revs_at(t)
    x = a[0] * np.cos(2 * np.pi * k[0] * revs) + a[1] * np.cos(2 * np.pi * k[1] * revs + 0.3)
    return x, rate, angle


def test_overall_rms_of_two_orders():
    from workbench.angle.overall import overall_level

    x, rate, angle = _two_orders()
    # Mean square of a sum of sinusoids: sum(A^2 / 2) (Parseval; any signal-processing text).
    want = np.sqrt((1.0 ** 2 + 0.5 ** 2) / 2)
    lvl = overall_level(x, rate, angle)
    assert np.all(np.abs(lvl.rms / want - 1) < 0.01)
    # In the order-map's rows: bins from row speeds, the result on the same speeds
    rows = np.linspace(1250.0, 1750.0, 11)
    lvl = overall_level(np.array_split(x, 7), rate, angle, rpm_rows=rows)
    assert np.array_equal(lvl.rpm, rows) and np.all(lvl.n_blocks > 0)
    assert np.all(np.abs(lvl.rms / want - 1) < 0.01)
    # A band holding order 11 only (220-330 Hz over the sweep): its RMS, A / sqrt 2
    lvl = overall_level(x, rate, angle, band_hz=(150.0, 900.0))
    assert np.all(np.abs(lvl.rms / (0.5 / np.sqrt(2)) - 1) < 0.02)


def test_track_json_has_overall_level(tmp_path):
    m = machine_from_dict({
        "machine": {"name": "two orders", "reference": "motor"}, "shaft": [{"name": "motor"}],
        "order": [{"name": "a", "shaft": "motor", "order": 3.0},
                  {"name": "b", "shaft": "motor", "order": 11.0, "level_db": -6.0}]})
    run = simulate_run(m, _plan(), RATE, seed=1, tacho_rise_s=2e-3, resonance_gain_db=0.0, noise_db=-80.0,
                       duration_s=8.0)
    a = track_run(run, samples_per_rev=64, revs_per_block=16, rf_map=False)
    got = a.to_dict()["overall"]
    assert len(got["rpm"]) == len(got["rms"]) == len(np.unique(a.order_map.rpm))
    # every line of the machine (the motor shaft's own order 1 included): sqrt(sum A^2 / 2),
    # A = 10**(level_db / 20); here sqrt((1 + 1 + 0.25) / 2) = 1.061
    want = np.sqrt(sum(10 ** (ln.level_db / 10) for ln in m.lines()) / 2)
    assert len(m.lines()) == 3
    rms = np.array([v for v in got["rms"] if v is not None])
    # the simulator's anti-alias filter (Butterworth, -3 dB at 450 Hz) takes < 0.1 % at 330 Hz
    assert rms.size > 0.9 * len(got["rms"]) and np.all(np.abs(rms / want - 1) < 0.02)


# -- valid regions ------------------------------------------------------------------------------

def test_valid_region_edge_is_the_butterworth_1db_point_and_the_cut_follows_it():
    from workbench.angle.validity import valid_region

    plan = plan_from_dict({
        "speed": {"profile": "linear", "start_rpm": 600.0, "end_rpm": 1800.0, "duration_s": 12.0},
        "acquisition": {"rates_hz": [RATE], "filter": "butterworth", "filter_order": 6, "cutoff": 0.39,
                        "threshold_db": -60.0}})
    v = valid_region(RATE, plan.filter)
    # Butterworth magnitude |H|^2 = 1 / (1 + (f/fc)^(2n)) (Butterworth 1930): 1 dB down where
    # (f/fc)^(2n) = 10^0.1 - 1, so f = fc (10^0.1 - 1)^(1/12) = 0.8934 x 390 Hz = 348.4 Hz.
    edge = 0.39 * RATE * (10 ** 0.1 - 1) ** (1 / 12)
    assert v.usable_hz == pytest.approx(edge, abs=0.05)
    assert v.nyquist_hz == RATE / 2 and valid_region(RATE).usable_hz == RATE / 2
    # order 20: usable up to 60 x 348.4 / 20 = 1045 rpm, folded above 60 x 500 / 20 = 1500 rpm
    assert v.edge_rpm(20.0) == pytest.approx(60 * edge / 20)
    assert v.edge_rpm(20.0, edge="nyquist") == pytest.approx(1500.0)
    m = machine_from_dict({"machine": {"name": "one order", "reference": "motor"},
                           "shaft": [{"name": "motor"}],
                           "order": [{"name": "mesh", "shaft": "motor", "order": 20.0}]})
    run = simulate_run(m, plan, RATE, seed=4, tacho_rise_s=2e-3, resonance_gain_db=0.0, noise_db=-80.0)
    a = track_run(run, samples_per_rev=128, revs_per_block=16, rf_map=False, cut_orders=(20.0,),
                  aa_filter=plan.filter)
    assert a.valid == v and a.to_dict()["valid_region"]["usable_hz"] == pytest.approx(edge)
    cut = a.cuts[0]
    r, amp = np.asarray(cut.rpm), np.asarray(cut.amplitude)
    top = v.edge_rpm(20.0 + cut.bandwidth_orders / 2)
    inside = r < top - 20
    # inside the valid region the simulated 1.0 (0 dB) reads within the filter's 1 dB
    assert inside.sum() > 5 and np.all(amp[inside] > 10 ** (-1.05 / 20)) and np.all(amp[inside] < 1.02)
    # beyond it, rolled off by more than 1 dB; above Nyquist the order is gone (folded)
    assert np.all(amp[(r > v.edge_rpm(20.0) + 20) & (r < 1500)] < 10 ** (-1 / 20))
    assert np.all(amp[r > 1520] < 1e-2)


def test_a_line_inside_a_cut_band_is_warned_about():
    from workbench.errors import FoldlineWarning

    m = machine_from_dict({"machine": {"name": "bearing near 1", "reference": "motor"},
                           "shaft": [{"name": "motor"}],
                           "order": [{"name": "cage", "shaft": "motor", "order": 0.944, "level_db": -6.0}]})
    run = simulate_run(m, _plan(), RATE, seed=6, tacho_rise_s=2e-3, resonance_gain_db=0.0, duration_s=6.0)
    # the order-1 cut with 16 revs per block sums 4 bins: 1 +- 0.125, which holds 0.944
    with pytest.warns(FoldlineWarning, match=r"order cut 1 .*'cage order' \(order 0.944\)"):
        a = track_run(run, machine=m, samples_per_rev=64, revs_per_block=16, rf_map=False, cut_orders=(1.0,))
    (d,) = [d for d in a.cut_band_lines if d["line"] == "cage order"]
    # 0.944 stays in the band at every speed: over the whole cut
    assert d["cut_order"] == 1.0 and d["zone"] == 0
    assert (d["rpm_min"], d["rpm_max"]) == (a.cuts[0].rpm.min(), a.cuts[0].rpm.max())
    assert not [d for d in a.cut_band_lines if d["line"] == "motor shaft"]  # the cut's own line
    assert a.to_dict()["cut_band_lines"][0]["line"] == "cage order"


# -- scaling: peak / RMS / dB, integration to velocity and displacement ----------------------------

@pytest.fixture(scope="module")
def one_order():
    m = machine_from_dict({"machine": {"name": "one order", "reference": "motor"},
                           "shaft": [{"name": "motor"}],
                           "order": [{"name": "mesh", "shaft": "motor", "order": 12.0, "level_db": 6.0}]})
    run = simulate_run(m, _plan(), RATE, seed=8, tacho_rise_s=2e-3, resonance_gain_db=0.0, noise_db=-80.0,
                       duration_s=10.0)
    return m, track_run(run, machine=m, samples_per_rev=64, revs_per_block=16, cut_orders=(12.0,))


def test_integration_of_a_sinusoid_matches_its_analytic_velocity(one_order):
    from workbench.angle.scaling import AmplitudeScaling
    from workbench.runs.scaled import scaled_analysis

    _m, a = one_order
    acc = 10 ** (6 / 20)  # peak acceleration of order 12, m/s^2 (level 6 dB re 1 m/s^2)
    assert a.unit == "m/s^2"
    v = scaled_analysis(a, AmplitudeScaling(integrate="velocity"))
    d = scaled_analysis(a, AmplitudeScaling(integrate="displacement", amplitude="rms"))
    cut, rpm = v.cuts[0], np.asarray(v.cuts[0].rpm)
    f = 12.0 * rpm / 60.0
    # a(t) = A cos(2 pi f t)  ->  v(t) = A / (2 pi f) sin(2 pi f t),  x(t) = -A / (2 pi f)^2 cos(...)
    # (calculus); shown in mm/s and um (RMS: / sqrt 2)
    np.testing.assert_allclose(cut.amplitude, 1e3 * acc / (2 * np.pi * f), rtol=0.02)
    np.testing.assert_allclose(d.cuts[0].amplitude, 1e6 * acc / (2 * np.pi * f) ** 2 / np.sqrt(2), rtol=0.02)
    assert v.unit == "mm/s" and d.unit == "um" and v.channel_unit == "m/s^2"
    assert v.to_dict()["scaling"]["label"] == "velocity, peak (mm/s)"
    # the peak of the integrated spectrum is the run's average of the velocity at order 12
    want = 1e3 * acc / (2 * np.pi * 12.0 / 60.0) * np.sqrt(np.mean(1 / rpm ** 2))
    p12 = v.peaks.iloc[(v.peaks["order"] - 12.0).abs().argmin()]
    assert p12["order"] == pytest.approx(12.0, abs=0.02)
    assert p12["amplitude"] == pytest.approx(want, rel=0.03)
    # identified amplitude: at the point of largest velocity (lowest speed)
    row = v.identification.table.set_index("line").loc["mesh order"]
    assert row["amplitude_max"] == pytest.approx(1e3 * acc / (2 * np.pi * f.min()), rel=0.03)


def test_rms_and_db_levels(one_order):
    from workbench.angle.scaling import AmplitudeScaling
    from workbench.runs.scaled import scaled_analysis

    _m, a = one_order
    rms = scaled_analysis(a, AmplitudeScaling(amplitude="rms"))
    np.testing.assert_allclose(rms.spectrum.amplitude, a.spectrum.amplitude / np.sqrt(2), rtol=1e-12)
    db = scaled_analysis(a, AmplitudeScaling(db_ref=1e-6))  # dB re 1 um/s^2, peak
    # 20 log10(A / ref) (definition of the level in dB)
    np.testing.assert_allclose(db.peaks["amplitude"], 20 * np.log10(a.peaks["amplitude"] / 1e-6), rtol=1e-12)
    assert db.unit == "dB re 1e-06 m/s^2"


def test_integrate_refuses_a_channel_that_is_not_acceleration(tmp_path, capsys):
    from workbench.angle.scaling import acceleration_factor, G_N
    from workbench.errors import InputError

    assert acceleration_factor("g") == G_N and acceleration_factor("mm/s^2") == 1e-3
    with pytest.raises(InputError, match="acceleration channel"):
        acceleration_factor("V")
    assert main(["track", "x.wav", "--integrate-from", "5"]) == 2
    assert "--integrate-from 5: it applies with --integrate" in capsys.readouterr().err


# -- maps as data -----------------------------------------------------------------------------------

def test_map_data_round_trip(tracked, tmp_path):
    from workbench.runs.mapdata import map_data, read_map_data, write_map_npz, write_map_parquet

    for obj, kind in ((tracked.order_map, "order"), (tracked.rf_map, "frequency")):
        d = map_data(obj, unit=tracked.unit)
        for path in (write_map_npz(d, tmp_path / f"{kind}.npz"), write_map_parquet(d, tmp_path / f"{kind}.parquet")):
            back = read_map_data(path)
            assert back.kind == kind and back.unit == "m/s^2" and back.amplitude_scaling == "peak"
            np.testing.assert_array_equal(back.rpm, obj.rpm)
            np.testing.assert_array_equal(back.axis, obj.order if kind == "order" else obj.hz)
            np.testing.assert_array_equal(back.amplitude, obj.amplitude)
            assert back.axes()["amplitude"] == "m/s^2"
    import pandas as pd

    t = pd.read_parquet(tmp_path / "order.parquet")  # a tidy table any tool reads
    assert list(t.columns) == ["rpm", "order", "amplitude", "n_averaged"]
    assert len(t) == tracked.order_map.amplitude.size


def test_waterfall_draws_one_row_per_chosen_speed(tracked):
    from workbench.plots import plot_waterfall

    fig = plot_waterfall(tracked.order_map, unit=tracked.unit, max_rows=12)
    lines = fig.axes[0].lines
    assert len(lines) == 12
    # each row sits at its speed: its baseline (the lowest point) is the row's rpm
    bases = sorted(float(np.min(ln.get_ydata())) for ln in lines)
    rpm = np.sort(tracked.order_map.rpm)
    assert bases[0] == pytest.approx(rpm[0]) and bases[-1] == pytest.approx(rpm[-1], rel=1e-3)


def test_rolloff_correction_inside_the_usable_band(capsys):
    from workbench.angle.validity import valid_region
    from workbench.runs.scaled import rolloff_corrected

    plan = plan_from_dict({
        "speed": {"profile": "linear", "start_rpm": 600.0, "end_rpm": 1100.0, "duration_s": 8.0},
        "acquisition": {"rates_hz": [RATE], "filter": "butterworth", "filter_order": 4, "cutoff": 0.3,
                        "threshold_db": -60.0}})
    m = machine_from_dict({"machine": {"name": "one order", "reference": "motor"},
                           "shaft": [{"name": "motor"}],
                           "order": [{"name": "mesh", "shaft": "motor", "order": 15.0}]})
    run = simulate_run(m, plan, RATE, seed=9, tacho_rise_s=2e-3, resonance_gain_db=0.0, noise_db=-80.0)
    a = track_run(run, samples_per_rev=128, revs_per_block=16, rf_map=False, cut_orders=(15.0,))
    c = rolloff_corrected(a, plan.filter)
    v = valid_region(RATE, plan.filter)
    r = np.asarray(a.cuts[0].rpm)
    inside = r < v.edge_rpm(15.0 + a.cuts[0].bandwidth_orders / 2) - 10
    raw, fixed = np.asarray(a.cuts[0].amplitude)[inside], np.asarray(c.cuts[0].amplitude)[inside]
    # Butterworth |H| = (1 + (f/fc)^(2n))^(-1/2) (Butterworth 1930): the raw cut sags by it
    # (up to 1 dB at the usable edge); corrected, it reads the simulated 1.0 within 0.5 %.
    f = 15.0 * r[inside] / 60.0
    h = (1 + (f / (0.3 * RATE)) ** 8) ** -0.5
    np.testing.assert_allclose(raw, h, rtol=0.01)
    np.testing.assert_allclose(fixed, 1.0, rtol=0.005)
    assert raw.min() < 0.95  # the correction matters here
    assert main(["track", "x.wav", "--correct-rolloff"]) == 2
    assert "--correct-rolloff: give the acquisition's plan" in capsys.readouterr().err
