"""Many channels against one tacho: track_channels, --channel lists, per-channel outputs,
threads, batch rows per channel.

Truth comes from analytic signals: every channel holds orders 2 and 7 of a known linear run-up
with its own amplitudes, so each channel's order spectrum must show its own amplitudes, and
tracking it together with the others must give exactly what tracking it alone gives (the block
plan is shared, the arithmetic per channel is the same).
"""

import json

import numpy as np
import pytest

from workbench.angle import ShaftAngle
from workbench.angle.tracking import OrderTracker, iter_resample_to_angle_channels, resample_to_angle
from workbench.cli.main import main
from workbench.cli.options import parse_channels
from workbench.errors import InputError, RunFileError
from workbench.runs import Channel, Run, write_run
from workbench.runs.analysis import MultiRunAnalysis, track_channels, track_run

RATE = 2048.0
DURATION = 8.0
RPM0, RPM1 = 600.0, 1500.0
N_VIB = 8
#: Amplitudes of orders 2 and 7 in each channel (m/s^2), all different.
AMP2 = [0.1 * (k + 1) for k in range(N_VIB)]
AMP7 = [0.05 * (N_VIB - k) for k in range(N_VIB)]


def _theta(t):
    """Shaft angle (rev) of the linear run-up: integral of the speed."""
    f0, f1 = RPM0 / 60.0, RPM1 / 60.0
    return f0 * t + 0.5 * (f1 - f0) / DURATION * t * t


def _run(n_vib=N_VIB):
    t = np.arange(int(DURATION * RATE)) / RATE
    th = _theta(t)
    rows = [AMP2[k] * np.cos(2 * np.pi * 2 * th) + AMP7[k] * np.sin(2 * np.pi * 7 * th + 0.3 * k)
            for k in range(n_vib)]
    # 1-pulse-per-rev tacho: a 5 V pulse over the first 10 % of each revolution, ramps of 4
    # samples (as a real tacho edge).
    frac = th - np.floor(th)
    tacho = 5.0 * np.clip(np.minimum(frac, 0.1 - frac) * RATE / (4 * (RPM0 / 60.0)) + 0.5, 0, 1)
    data = np.vstack(rows + [tacho])
    names = [f"acc {k + 1}" for k in range(n_vib)] + ["tacho"]
    chans = [Channel(n, "m/s^2") for n in names[:-1]] + [Channel("tacho", "V")]
    return Run(data, RATE, chans, tacho="tacho")


@pytest.fixture(scope="module")
def run_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("mc") / "bench8.npz"
    write_run(_run(), path)
    return path


@pytest.fixture(scope="module")
def multi(run_file):
    return track_channels(run_file, channels="all", samples_per_rev=64, revs_per_block=16,
                          rf_map=False, threads=1)


def _amp_at(a, order):
    i = int(np.argmin(np.abs(a.spectrum.order - order)))
    return float(a.spectrum.amplitude[i])


def test_eight_channels_in_one_call_equal_each_alone(run_file, multi):
    assert isinstance(multi, MultiRunAnalysis) and len(multi) == N_VIB
    assert multi.channel_names == tuple(f"acc {k + 1}" for k in range(N_VIB))
    for k in (0, 3, 7):
        alone = track_run(run_file, channel=k + 1, samples_per_rev=64, revs_per_block=16,
                          rf_map=False)
        together = multi.channels[k]
        # Same arithmetic per channel: identical spectra and maps (exact equality).
        assert np.array_equal(alone.spectrum.amplitude, together.spectrum.amplitude)
        assert np.array_equal(alone.order_map.amplitude, together.order_map.amplitude,
                              equal_nan=True)
        assert alone.to_dict()["peaks"] == together.channel_dict()["peaks"]
    # The speed is computed once: every channel holds the very same ShaftAngle object.
    assert all(a.shaft_angle is multi.first.shaft_angle for a in multi.channels)


def test_each_channel_shows_its_own_analytic_amplitudes(multi):
    # Truth from the analytic signal: a stationary order's window-corrected peak amplitude
    # equals its amplitude (Harris 1978); orders 2 and 7 sit on bins (16 revs per block).
    for k, a in enumerate(multi.channels):
        assert _amp_at(a, 2.0) == pytest.approx(AMP2[k], rel=0.012)   # within 0.1 dB
        assert _amp_at(a, 7.0) == pytest.approx(AMP7[k], rel=0.012)


def test_threads_give_the_serial_result_exactly(run_file, multi):
    par = track_channels(run_file, channels="all", samples_per_rev=64, revs_per_block=16,
                         rf_map=False, threads=3)
    assert par.threads == 3
    for s, p in zip(multi.channels, par.channels):
        assert np.array_equal(s.spectrum.amplitude, p.spectrum.amplitude)
        assert np.array_equal(s.order_map.amplitude, p.order_map.amplitude, equal_nan=True)


def test_tracker_on_a_2d_chunk_stream_equals_one_channel_at_a_time():
    angle = ShaftAngle.from_speed_table([0.0, 4.0], [600.0, 1200.0])
    t = np.arange(int(4 * RATE)) / RATE
    th = angle.revs_at(t)
    x = np.vstack([np.cos(2 * np.pi * 3 * th), 0.5 * np.sin(2 * np.pi * 11 * th),
                   np.cos(2 * np.pi * 40 * th)])
    chunks = [x[:, i:i + 5000] for i in range(0, x.shape[1], 5000)]
    pieces = list(iter_resample_to_angle_channels(chunks, RATE, angle, samples_per_rev=32, threads=2))
    for r in range(3):
        alone = resample_to_angle(x[r], RATE, angle, samples_per_rev=32)
        joined = np.concatenate([p[r].data for p in pieces])
        assert np.array_equal(joined, alone.data)
    # One channel on a thread pool: the serial result exactly.
    sig = resample_to_angle(x[0], RATE, angle, samples_per_rev=32)
    assert np.array_equal(resample_to_angle(x[0], RATE, angle, samples_per_rev=32, threads=3).data,
                          sig.data)
    # Check against the analytic angle-domain signal (order 3, amplitude 1) away from the ends.
    inner = slice(200, -200)
    assert np.max(np.abs(sig.data[inner] - np.cos(2 * np.pi * 3 * sig.revs[inner]))) < 1e-4


def test_tracker_refuses_a_change_of_channel_count():
    angle = ShaftAngle.from_rpm(600.0, 2.0)
    tr = OrderTracker(RATE, angle, samples_per_rev=16)
    tr.feed(np.zeros((2, 1000)))
    with pytest.raises(InputError, match="shape of the first chunk"):
        tr.feed(np.zeros((3, 1000)))


def test_numpy_spline_matches_scipy_map_coordinates():
    # Outside reference: scipy.ndimage's quintic B-spline evaluation (no prefilter), which the
    # tracker used before; the closed-form weights (Thevenaz, Blu, Unser 2000) must agree.
    from scipy import ndimage

    from workbench.angle.tracking import _quintic_eval, _quintic_weights

    rng = np.random.default_rng(3)
    y = rng.normal(size=5000).astype(np.float32)
    q = np.sort(rng.uniform(10, 4980, 20000))
    ref = ndimage.map_coordinates(y, q[None, :], order=5, prefilter=False, mode="mirror",
                                  output=np.float64)
    i = np.floor(q)
    got = _quintic_eval(y, i.astype(np.intp) - 2, _quintic_weights(q - i))
    assert np.max(np.abs(got - ref)) < 1e-12
    # In single precision (as the tracker works): relative rounding about 1e-7 (-140 dB).
    w32 = _quintic_weights((q - i).astype(np.float32))
    assert np.max(np.abs(_quintic_eval(y, i.astype(np.intp) - 2, w32) - ref)) < 1e-6 * np.max(np.abs(ref))


def test_kaiser_design_matches_scipy_firwin():
    from scipy.signal import firwin

    from workbench.angle.tracking import kaiser_lowpass

    beta = 0.1102 * (100.0 - 8.7)   # Kaiser 1974 / Oppenheim & Schafer (7.62), A = 100 dB
    for n, fc in ((101, 3000.0), (2047, 812.3)):
        assert np.allclose(kaiser_lowpass(n, fc, 51200.0, beta),
                           firwin(n, fc, window=("kaiser", beta), fs=51200.0), rtol=0, atol=1e-15)


def test_numpy_peak_finder_matches_scipy_find_peaks():
    from scipy.signal import find_peaks

    from workbench.angle.spectra import _prominent_peaks

    rng = np.random.default_rng(5)
    for trial in range(60):
        x = rng.normal(size=int(rng.integers(3, 300)))
        if trial % 2:
            x = np.round(x, 1)            # flat tops
        want, props = find_peaks(x, prominence=0.5)
        got, prom = _prominent_peaks(x, 0.5)
        assert np.array_equal(want, got)
        assert np.array_equal(props["prominences"], prom)


# ---- channel lists ----------------------------------------------------------------------------

def test_parse_channels():
    assert parse_channels("1,3,4") == (1, 3, 4)
    assert parse_channels("acc 2, 5") == ("acc 2", 5)
    assert parse_channels("ALL") == "all"
    assert parse_channels("2") == (2,)
    assert parse_channels(None) is None
    for bad, why in (("1,,3", "empty entry"), ("0", "out of range"), ("1,all", "cannot be mixed"),
                     ("", "empty entry")):
        with pytest.raises(InputError, match=why):
            parse_channels(bad)


def test_track_channels_resolves_names_indices_and_all(run_file):
    m = track_channels(run_file, channels=("acc 2", 5, "acc 2"), samples_per_rev=32,
                       revs_per_block=8, rf_map=False, threads=1)
    assert m.channel_names == ("acc 2", "acc 5")
    with pytest.raises(InputError, match=r"^channel = .*: not a channel of .*not found"):
        track_channels(run_file, channels=("acc 99",), rf_map=False)
    with pytest.raises(InputError, match="track_channels"):
        track_run(run_file, channel=[1, 2])


def test_all_on_a_run_with_only_the_tacho_is_refused(tmp_path):
    r = _run(n_vib=1)
    only = Run(r.data[1:], RATE, [Channel("tacho", "V")], tacho="tacho")
    with pytest.raises(RunFileError, match="only the tacho"):
        track_channels(only, channels="all")


@pytest.mark.parametrize("value", ["1,,2", "0", "all,1", "nine"])
def test_cli_bad_channel_list_is_one_line_exit_2(run_file, value, capsys):
    assert main(["track", str(run_file), "--channel", value, "--json"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("foldline: error: ") and "--channel" in err[0]


def test_cli_bad_threads_is_one_line_exit_2(run_file, capsys):
    assert main(["track", str(run_file), "--threads", "0", "--json"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--threads" in err[0]


def test_cli_json_shape_for_several_channels(run_file, multi, capsys):
    assert main(["track", str(run_file), "--channel", "1,acc 3,8", "--samples-per-rev", "64",
                 "--revs-per-block", "16", "--threads", "2", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    for key in ("rpm_min", "rpm_max", "revolutions", "samples_per_rev", "speed_source"):
        assert key in d                      # the speed keys stay at the top
    assert "order_spectrum" not in d and "peaks" not in d
    assert [c["channel"] for c in d["channels"]] == ["acc 1", "acc 3", "acc 8"]
    for c in d["channels"]:
        # the keys of the contract, and each channel's own overall level and unmatched lines
        assert {"channel", "unit", "order_spectrum", "peaks", "envelope_peaks",
                "identified"} <= set(c) <= {"channel", "unit", "order_spectrum", "peaks",
                                            "envelope_peaks", "identified", "overall",
                                            "unmatched", "cut_band_lines", "scaling"}
        assert c["unit"] == "m/s^2"
    # Channel 3's spectrum is the one tracked with all the others (threads do not matter).
    assert d["channels"][1]["order_spectrum"]["amplitude"] == pytest.approx(
        list(multi.channels[2].spectrum.amplitude), abs=0)
    # The speed starts at the first pulse, one revolution into the run-up (600 -> 1500 rpm).
    assert d["rpm_min"] == pytest.approx(RPM0, rel=0.02)


def test_cli_one_channel_keeps_the_single_channel_json(run_file, capsys):
    assert main(["track", str(run_file), "--channel", "2", "--samples-per-rev", "32",
                 "--revs-per-block", "8", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert "channels" not in d and d["channel"] == "acc 2" and "order_spectrum" in d


def test_batch_has_one_row_per_run_and_channel(run_file, tmp_path):
    from workbench.batch import BatchSettings, run_batch

    settings = BatchSettings.make(track={"channels": (1, 4), "samples_per_rev": 32,
                                         "revs_per_block": 8})
    res = run_batch([run_file], tmp_path / "b", settings=settings, workers=0)
    table = res.summary
    assert list(table["channel"]) == ["acc 1", "acc 4"]
    assert set(table["status"]) == {"ok"}
    assert table["file"].nunique() == 1
    # Each row's top order is that channel's strongest: order 2 for acc 4 (0.4 vs 0.25).
    assert table["top_orders"].iloc[1].startswith("2.00:")
    # Resume: the same batch again skips the run (both channel rows kept once).
    again = run_batch([run_file], tmp_path / "b", settings=settings, workers=0)
    assert again.skipped == (str(run_file),) and len(again.summary) == 2
