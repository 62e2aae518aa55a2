"""Run-file formats as plug-ins: the registry, a round trip per format, and the MDF4 and HDF5
readers on real files written with asammdf and h5py.

The run-up is an analytic signal: shaft angle theta(t) = f0 t + a t^2 / 2 revolutions, a
vibration A3 cos(2 pi 3 theta) + A7 cos(2 pi 7.5 theta) in m/s^2 and a 1-per-rev tacho in V
(0 to 5 V, edges rounded by a tanh so that they span a few samples).  The tracked order amplitudes are checked against A3 and A7 (the source: the analytic
signal itself).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from workbench.errors import InputError, RunFileError
from workbench.runs import Run, read_run, write_run
from workbench.runs.analysis import track_run
from workbench.runs.formats import (FORMATS, FormatRead, format_for, known_suffixes,
                                    reader_for, register_format, writable_suffixes)

h5py = pytest.importorskip("h5py")
asammdf = pytest.importorskip("asammdf")

RATE = 4096.0
DURATION = 8.0
F0, ACC = 10.0, 2.5  # 600 rpm rising at 150 rpm/s to 1800 rpm
A3, A7 = 2.0, 0.5  # m/s^2, orders 3 and 7.5


def runup(rate=RATE, duration=DURATION):
    t = np.arange(int(round(rate * duration))) / rate
    theta = F0 * t + 0.5 * ACC * t * t
    vib = A3 * np.cos(2 * np.pi * 3 * theta) + A7 * np.cos(2 * np.pi * 7.5 * theta)
    tacho = 2.5 + 2.5 * np.tanh(8 * np.sin(2 * np.pi * theta))  # edges a few samples long
    return t, vib, tacho


def order_amplitude(analysis, order):
    s = analysis.spectrum
    return float(s.amplitude[np.argmin(np.abs(s.order - order))])


def check_orders(analysis):
    # Truth: the analytic signal's amplitudes A3 and A7 (peak), within 0.01 dB (measured: 4e-6 dB).
    for order, truth in ((3.0, A3), (7.5, A7)):
        level_db = 20 * math.log10(order_amplitude(analysis, order) / truth)
        assert abs(level_db) < 0.01, (order, level_db)


def write_mf4(path, groups):
    """groups: list of (time_s, [(name, samples, unit), ...])."""
    mdf = asammdf.MDF(version="4.10")
    for t, chans in groups:
        mdf.append([asammdf.Signal(x, t, name=n, unit=u) for n, x, u in chans])
    mdf.save(path, overwrite=True)
    mdf.close()


# --------------------------------------------------------------------------- MDF4
def test_mdf4_runup_names_units_rate_and_order_amplitude(tmp_path):
    t, vib, tacho = runup()
    slow = np.arange(int(DURATION * 10)) / 10.0
    path = tmp_path / "runup.mf4"
    write_mf4(path, [(t, [("vib", vib, "m/s^2"), ("tacho", tacho, "V")]),
                     (slow, [("oil_temp", 40 + slow, "degC")])])
    # Channels of two rates: refused, naming each channel's group and rate.
    with pytest.raises(RunFileError, match=r"not sampled together: 'vib' \(group 0\): 4096 Hz.*"
                                           r"'oil_temp' \(group 1\): 10 Hz"):
        read_run(path)
    run = read_run(path, channels=["vib", "tacho"])
    assert run.channel_names == ("vib", "tacho")
    assert [c.unit for c in run.channels] == ["m/s^2", "V"]
    assert run.rate_hz == RATE
    np.testing.assert_array_equal(run.channel("vib"), vib)
    assert run.log[0][2]["format"] == "mf4" and run.log[0][2]["groups"] == [0]
    # The sidecar picks the channels by name, names the tacho and completes the sensitivity.
    (tmp_path / "runup.json").write_text(json.dumps({
        "channels": [{"name": "vib", "sensitivity": 0.5}, {"name": "tacho"}],
        "tacho_channel": "tacho", "pulses_per_rev": 1}))
    run = read_run(path)
    assert run.tacho == "tacho" and run.channels[0].unit == "m/s^2"
    np.testing.assert_allclose(run.channel("vib"), vib / 0.5)
    # Tracked from the file: sensitivity 1 in the sidecar so the amplitudes are the analytic ones.
    (tmp_path / "runup.json").write_text(json.dumps({
        "channels": [{"name": "vib"}, {"name": "tacho"}], "tacho_channel": "tacho"}))
    a = track_run(path, samples_per_rev=64, revs_per_block=8, rf_map=False)
    assert a.channel == "vib" and a.unit == "m/s^2"
    assert a.shaft_angle.rpm_at(np.array([4.0]))[0] == pytest.approx(60 * (F0 + ACC * 4.0),
                                                                       rel=2e-3)
    check_orders(a)
    # The sidecar's tacho channel is read beside the channels asked for.
    (tmp_path / "runup.json").write_text(json.dumps({"tacho_channel": "tacho"}))
    run = read_run(path, channels=["vib"])
    assert run.channel_names == ("vib", "tacho") and run.tacho == "tacho"
    assert run.log[0][2]["channels_read"] == ["vib", "tacho"]


def test_mdf4_one_rate_reads_every_channel_and_streams(tmp_path):
    t, vib, tacho = runup(duration=2.0)
    path = tmp_path / "r.mf4"
    write_mf4(path, [(t, [("vib", vib.astype(np.float32), "g"), ("tacho", tacho, "V")])])
    run = read_run(path)
    assert run.channel_names == ("vib", "tacho") and run.rate_hz == RATE
    chunks = list(run.iter_chunks("vib", 1000))
    np.testing.assert_array_equal(np.concatenate(chunks), vib.astype(np.float32))
    # The sidecar's unit must agree with the file's.
    (tmp_path / "r.json").write_text(json.dumps({"channels": [{"name": "vib", "unit": "m/s^2"}]}))
    with pytest.raises(RunFileError, match=r"channel 'vib' has unit 'm/s\^2' but .* says 'g'"):
        read_run(path)
    with pytest.raises(RunFileError, match=r"no channel named 'accel'; the file's channels: vib, "
                                           r"tacho"):
        read_run(path, channels=["accel"], sidecar=_empty_sidecar(tmp_path))


def _empty_sidecar(tmp_path):
    p = tmp_path / "empty_sidecar.json"
    p.write_text("{}")
    return p


def test_mdf4_non_uniform_time_base_is_refused(tmp_path):
    t, vib, _ = runup(duration=1.0)
    t = t.copy()
    t[100] += 0.2 / RATE  # one stamp a fifth of a sample late
    path = tmp_path / "jitter.mf4"
    write_mf4(path, [(t, [("vib", vib, "m/s^2")])])
    with pytest.raises(RunFileError, match=r"not uniformly sampled: sample 101 .* 0\.2 sample "
                                           r"periods .*\(allowed: 0\.01\)"):
        read_run(path)


def test_damaged_mdf4_and_hdf5_files_are_refused_with_the_file_named(tmp_path):
    (tmp_path / "g.mf4").write_bytes(b"garbage bytes, no identification block")
    with pytest.raises(RunFileError, match=r"g\.mf4: is not an MDF file"):
        read_run(tmp_path / "g.mf4", rate_hz=10.0)
    (tmp_path / "g.h5").write_bytes(b"garbage bytes, no HDF5 signature")
    with pytest.raises(RunFileError, match=r"g\.h5: cannot be read as an HDF5 file"):
        read_run(tmp_path / "g.h5", rate_hz=10.0)


# --------------------------------------------------------------------------- HDF5
def test_hdf5_one_dataset_per_channel_runup(tmp_path):
    t, vib, tacho = runup()
    path = tmp_path / "runup.h5"
    with h5py.File(path, "w", track_order=True) as f:
        g = f.create_group("run", track_order=True)
        g.create_dataset("vib", data=vib).attrs.update({"unit": "m/s^2", "rate_hz": RATE})
        g.create_dataset("tacho", data=tacho).attrs.update({"unit": "V", "rate_hz": RATE})
        g.create_dataset("time", data=t)
    run = read_run(path)
    assert run.channel_names == ("vib", "tacho")
    assert [c.unit for c in run.channels] == ["m/s^2", "V"] and run.rate_hz == RATE
    assert run.log[0][2]["layout"] == "one dataset per channel"
    assert run.log[0][2]["time_dataset"] == "/run/time"
    np.testing.assert_array_equal(np.concatenate(list(run.iter_chunks("tacho", 4000))), tacho)
    a = track_run(path, tacho="tacho", samples_per_rev=64, revs_per_block=8, rf_map=False)
    assert a.channel == "vib" and a.unit == "m/s^2"
    check_orders(a)


def test_hdf5_2d_dataset_is_memory_mapped_and_tracks(tmp_path):
    t, vib, tacho = runup()
    path = tmp_path / "runup.hdf5"
    with h5py.File(path, "w") as f:
        d = f.create_dataset("data", data=np.stack([vib, tacho], axis=1).astype(np.float32))
        d.attrs.update({"channels": ["vib", "tacho"], "units": ["m/s^2", "V"], "rate_hz": RATE})
    (tmp_path / "runup.json").write_text(json.dumps({"tacho_channel": "tacho"}))
    run = read_run(path)
    assert isinstance(run.data, np.memmap)
    assert run.channel_names == ("vib", "tacho") and run.channels[0].unit == "m/s^2"
    assert run.log[0][2]["stored"] == "samples x channels"
    np.testing.assert_array_equal(run.channel("vib"), vib.astype(np.float32))
    a = track_run(path, samples_per_rev=64, revs_per_block=8, rf_map=False)
    check_orders(a)


def test_hdf5_compressed_and_selected_channels(tmp_path):
    t, vib, tacho = runup(duration=1.0)
    other = np.ones_like(vib)
    path = tmp_path / "c.h5"
    with h5py.File(path, "w") as f:
        d = f.create_dataset("data", data=np.stack([other, vib, tacho]), chunks=(3, 1000),
                             compression="gzip")
        d.attrs.update({"channels": ["bias", "vib", "tacho"], "rate_hz": RATE})
        f.attrs["rate_hz"] = RATE
    run = read_run(path)
    assert not isinstance(run.data, np.memmap) and run.n_channels == 3
    np.testing.assert_array_equal(run.channel("vib"), vib)
    # The sidecar picks two of the three channels by name, and sets the units.
    (tmp_path / "c.json").write_text(json.dumps({
        "channels": [{"name": "tacho", "unit": "V"}, {"name": "vib", "unit": "g"}]}))
    run = read_run(path)
    assert run.channel_names == ("tacho", "vib") and [c.unit for c in run.channels] == ["V", "g"]
    np.testing.assert_array_equal(run.channel("vib"), vib)


def test_hdf5_disagreeing_rates_and_lengths_are_refused(tmp_path):
    path = tmp_path / "bad.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("a", data=np.zeros(10)).attrs["rate_hz"] = 100.0
        f.create_dataset("b", data=np.zeros(10)).attrs["rate_hz"] = 200.0
    with pytest.raises(RunFileError, match="sample rates disagree"):
        read_run(path)
    with h5py.File(path, "w") as f:
        f.create_dataset("a", data=np.zeros(10))
        f.create_dataset("b", data=np.zeros(12))
    with pytest.raises(RunFileError, match=r"differ in length \('a' 10, 'b' 12 samples\)"):
        read_run(path, rate_hz=100.0)
    with h5py.File(path, "w") as f:
        f.create_dataset("a", data=np.zeros(10))
    with pytest.raises(RunFileError, match="gives no sample rate"):
        read_run(path)
    assert read_run(path, rate_hz=100.0).channel_names == ("a",)


# --------------------------------------------------------------------------- the registry
def _write_wav(run, path):
    write_run(run, path)


def _write_npz(run, path):
    write_run(run, path)


def _write_csv(run, path):
    import pandas as pd

    cols = {"time_s": run.time_s, **{n: run.channel(n) for n in run.channel_names}}
    pd.DataFrame(cols).to_csv(path, index=False, float_format="%.17g")


def _write_mat(run, path):
    import scipy.io

    scipy.io.savemat(path, {n: run.channel(n) for n in run.channel_names})
    path.with_suffix(".json").write_text(json.dumps({"rate_hz": run.rate_hz}))


def _write_mf4(run, path):
    write_mf4(path, [(run.time_s, [(n, run.channel(n), "V") for n in run.channel_names])])


def _write_h5(run, path):
    with h5py.File(path, "w", track_order=True) as f:
        for n in run.channel_names:
            f.create_dataset(n, data=run.channel(n)).attrs.update({"rate_hz": run.rate_hz,
                                                                     "unit": "V"})


# Every registered format, written by its own writer or the library that defines it.
ROUND_TRIP = {"wav": (".wav", _write_wav), "csv": (".csv", _write_csv),
              "npz": (".npz", _write_npz), "mat": (".mat", _write_mat),
              "mdf4": (".mf4", _write_mf4), "hdf5": (".hdf5", _write_h5)}


def test_every_registered_format_has_a_round_trip_case():
    assert set(ROUND_TRIP) == set(FORMATS)


@pytest.mark.parametrize("name", sorted(ROUND_TRIP))
def test_round_trip_through_the_registry(tmp_path, name):
    suffix, write = ROUND_TRIP[name]
    rng = np.random.default_rng(3)
    x = rng.uniform(-0.9, 0.9, (2, 500)).astype(np.float32)
    run = Run(x, 1000.0, ["u", "v"])
    path = tmp_path / f"r{suffix}"
    write(run, path)
    assert format_for(path) is FORMATS[name]
    back = read_run(path)
    assert back.rate_hz == 1000.0 and back.channel_names == ("u", "v")
    np.testing.assert_allclose(back.data.astype(np.float64), x.astype(np.float64), rtol=0,
                               atol=1e-7)


def test_unknown_suffix_lists_every_known_one(tmp_path):
    (tmp_path / "r.flac").write_bytes(b"fLaC....")
    with pytest.raises(RunFileError) as err:
        read_run(tmp_path / "r.flac")
    message = str(err.value)
    assert "extension '.flac' is not a run file format; allowed: " in message
    for suffix in (".wav", ".csv", ".npz", ".mat", ".mf4", ".h5", ".hdf5"):
        assert suffix in message
    assert known_suffixes()[:4] == (".wav", ".csv", ".npz", ".mat")
    with pytest.raises(RunFileError, match=r"cannot write extension '\.h5'; allowed: \.wav, "
                                           r"\.npz$"):
        write_run(Run(np.zeros((1, 4)), 10.0, ["x"]), tmp_path / "w.h5")
    assert writable_suffixes() == (".wav", ".npz")


def test_a_registered_format_is_read_by_read_run(tmp_path):
    def read_lines(path, request):
        values = np.array([float(v) for v in path.read_text().split()])
        return FormatRead(values.reshape(1, -1), rate_hz=50.0, names=["level"], units=["Pa"])

    fmt = register_format(".lvl", read_lines, name="levels-test")
    try:
        assert reader_for(tmp_path / "a.LVL") is read_lines
        (tmp_path / "a.lvl").write_text("1 2 3 4")
        run = read_run(tmp_path / "a.lvl")
        assert run.channel_names == ("level",) and run.rate_hz == 50.0
        assert run.channels[0].unit == "Pa" and run.log[0][2]["format"] == "lvl"
        with pytest.raises(InputError, match="suffix .lvl is read by format 'levels-test'"):
            register_format(".LVL", read_lines, name="other")
        with pytest.raises(InputError, match="registered already"):
            register_format(".lv2", read_lines, name="levels-test")
        with pytest.raises(InputError, match="starting with a dot"):
            register_format("lv3", read_lines, name="other")
    finally:
        del FORMATS[fmt.name]
    assert format_for(tmp_path / "a.lvl") is None


def test_channels_keyword_keeps_rows_for_formats_read_whole(tmp_path):
    x = np.arange(30, dtype=np.float64).reshape(3, 10)
    write_run(Run(x, 100.0, ["a", "b", "c"], tacho="c"), tmp_path / "r.npz")
    run = read_run(tmp_path / "r.npz", channels=["b"])
    # The sidecar's tacho channel is kept beside the channels asked for.
    assert run.channel_names == ("b", "c") and run.tacho == "c"
    np.testing.assert_array_equal(run.data, x[1:])
    with pytest.raises(RunFileError, match=r"no channel named 'z'; the run's channels: a, b, c"):
        read_run(tmp_path / "r.npz", channels=["z"])
    with pytest.raises(InputError, match="list of channel names"):
        read_run(tmp_path / "r.npz", channels="b")
