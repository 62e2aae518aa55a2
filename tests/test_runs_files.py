"""Tests of workbench.runs.files: read_run / write_run for WAV, CSV, NPZ and MAT with sidecars."""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import pytest
import scipy.io
import scipy.io.wavfile as wavfile

from workbench.errors import FoldlineWarning, InputError, OutputExistsError, RunFileError
from workbench.runs.files import read_run, write_run
from workbench.runs.run import Channel, Run
from workbench.runs.sidecar import Sidecar

CWRU = Path("/work/shared/data/cwru/105_inner_race_007_1797rpm.mat")


def _run(n=3000, rate=1000.0, **kw):
    t = np.arange(n) / rate
    data = np.vstack([0.4 * np.sin(2 * np.pi * 50 * t), 0.2 * np.cos(2 * np.pi * 7 * t),
                      np.where(np.sin(2 * np.pi * 5 * t) > 0, 0.5, 0.0)])
    chans = (Channel("vibration", "m/s^2", 0.5), Channel("mic", "Pa", 2.0), Channel("tacho", "V"))
    return Run(data, rate, chans, tacho="tacho", pulses_per_rev=60, missing_pulses=2, **kw)


# --------------------------------------------------------------------------- WAV + sidecar
@pytest.mark.parametrize(("fmt", "lsb"), [("int16", 2.0**-15), ("int24", 2.0**-23),
                                          ("int32", 2.0**-31), ("float32", 2.0**-24)])
def test_wav_round_trip_with_sidecar(tmp_path, fmt, lsb):
    run = _run()
    path = write_run(run, tmp_path / "r.wav", sample_format=fmt, notes={"who": "test"})
    back = read_run(path)
    assert back.channels == run.channels
    assert (back.tacho, back.pulses_per_rev, back.missing_pulses) == ("tacho", 60, 2)
    assert back.rate_hz == 1000.0 and back.n_samples == 3000
    for i, c in enumerate(run.channels):
        # quantisation: half a code (float32: half an ulp of values below 1) over sensitivity
        np.testing.assert_allclose(back.channel(c.name), run.channel(c.name), rtol=0,
                                   atol=0.5 * lsb / c.sensitivity * (1 + 1e-9))
    # scipy reads the same samples (independent reference library)
    rate, ref = wavfile.read(path)
    scale = {"int16": 2.0**15, "int24": 2.0**31, "int32": 2.0**31, "float32": 1.0}[fmt]
    assert rate == 1000
    np.testing.assert_array_equal(back.channel(1), ref[:, 0] / scale / 0.5)
    side = json.loads((tmp_path / "r.json").read_text())
    assert side["notes"] == {"who": "test"} and side["tacho_channel"] == "tacho"
    assert back.log[0][1] == "read" and back.log[0][2]["sample_format"] == fmt


def test_wav_reading_is_memory_mapped(tmp_path):
    path = write_run(_run(), tmp_path / "r.wav", sample_format="int16")
    run = read_run(path)
    assert isinstance(run.data, np.memmap) and not run.data.flags.writeable


def test_wav_without_sidecar_gets_numbered_channels(tmp_path):
    wavfile.write(tmp_path / "plain.wav", 8000, np.zeros((10, 2), dtype=np.int16))
    run = read_run(tmp_path / "plain.wav")
    assert run.channel_names == ("ch1", "ch2") and run.tacho is None
    assert run.log[0][2]["sidecar"] is None


def test_nan_in_memory_mapped_float_wav_named_with_time(tmp_path):
    x = np.zeros((70000, 2), dtype=np.float32)
    x[69999, 1] = np.nan  # beyond the first 65,536-sample chunk of the scan
    x[69999, 0] = 0.5
    wavfile.write(tmp_path / "n.wav", 10000, x)
    with pytest.raises(RunFileError, match=r"channel 'ch2' holds nan at sample 70000 "
                                           r"\(t = 6.9999 s\)"):
        read_run(tmp_path / "n.wav")


def test_sidecar_rate_conflicting_with_header(tmp_path):
    path = write_run(_run(), tmp_path / "r.wav")
    side = json.loads((tmp_path / "r.json").read_text())
    side["rate_hz"] = 999
    (tmp_path / "r.json").write_text(json.dumps(side))
    with pytest.raises(RunFileError, match=r"sample rates disagree \(the WAV file says 1000 Hz; "
                                           r".*r.json says 999 Hz\)"):
        read_run(path)
    with pytest.raises(RunFileError, match="--rate .rate_hz=. says 1001 Hz"):
        read_run(path, sidecar=Sidecar(), rate_hz=1001)


def test_sidecar_channel_count_and_tacho_checked_against_file(tmp_path):
    path = write_run(_run(), tmp_path / "r.wav")
    two = Sidecar(channels=(Channel("a"), Channel("b")))
    with pytest.raises(RunFileError, match=r"lists 2 channel\(s\) but .*r.wav holds 3"):
        read_run(path, sidecar=two)
    with pytest.raises(RunFileError, match=r"tacho_channel 4 is out of range; .* channels 1 to 3"):
        read_run(path, sidecar=Sidecar(tacho_channel=4))
    with pytest.raises(RunFileError, match=r"tacho_channel 'speed' is not a channel .*ch1, ch2"):
        read_run(path, sidecar=Sidecar(tacho_channel="speed"))
    run = read_run(path, sidecar=Sidecar(tacho_channel="3"))
    assert run.tacho == "ch3"


def test_explicit_sidecar_path(tmp_path):
    path = write_run(_run(), tmp_path / "r.wav")
    (tmp_path / "r.json").rename(tmp_path / "meta.json")
    assert read_run(path).channel_names == ("ch1", "ch2", "ch3")
    assert read_run(path, sidecar=tmp_path / "meta.json").channel_names[0] == "vibration"


def test_machine_file_kept_when_inside_the_folder(tmp_path):
    machine = tmp_path / "gearbox.toml"
    machine.write_text("")
    write_run(_run(machine_file=str(machine)), tmp_path / "r.wav")
    assert json.loads((tmp_path / "r.json").read_text())["machine_file"] == "gearbox.toml"
    assert read_run(tmp_path / "r.wav").machine_file == str(machine.resolve())


def test_machine_file_outside_the_folder_is_dropped_with_a_warning(tmp_path):
    (tmp_path / "out").mkdir()
    with pytest.warns(FoldlineWarning, match="lies outside the output folder"):
        write_run(_run(machine_file=str(tmp_path / "m.toml")), tmp_path / "out" / "r.wav")
    assert "machine_file" not in json.loads((tmp_path / "out" / "r.json").read_text())


def test_write_refuses_existing_files_and_writes_nothing(tmp_path):
    (tmp_path / "r.json").write_text("{}")
    with pytest.raises(OutputExistsError, match="r.json: exists already; pass --force"):
        write_run(_run(), tmp_path / "r.wav")
    assert not (tmp_path / "r.wav").exists()
    write_run(_run(), tmp_path / "r.wav", force=True)
    assert read_run(tmp_path / "r.wav").n_channels == 3


def test_failed_write_leaves_neither_file(tmp_path):
    loud = Run(np.array([[0.5, 1.5]]), 100.0, ["a"])
    with pytest.raises(InputError, match="channel 'a' reaches 1.5 of full scale"):
        write_run(loud, tmp_path / "r.wav", sample_format="int16")
    assert list(tmp_path.iterdir()) == []


def test_write_extension_and_rate_checks(tmp_path):
    with pytest.raises(RunFileError, match=r"cannot write extension '.csv'; allowed: .wav, .npz"):
        write_run(_run(), tmp_path / "r.csv")
    odd = Run(np.zeros((1, 4)), 100.5, ["a"])
    with pytest.raises(InputError, match=r"rate_hz = 100\.5: cannot be stored.*\.npz"):
        write_run(odd, tmp_path / "r.wav")
    assert list(tmp_path.iterdir()) == []
    write_run(odd, tmp_path / "r.npz")
    assert read_run(tmp_path / "r.npz").rate_hz == 100.5


def test_memmapped_pcm_written_to_npz_keeps_physical_values(tmp_path):
    write_run(_run(), tmp_path / "a.wav", sample_format="int16")
    a = read_run(tmp_path / "a.wav")
    write_run(a, tmp_path / "b.npz")
    b = read_run(tmp_path / "b.npz")
    np.testing.assert_array_equal(b.channel("vibration"), a.channel("vibration"))


# --------------------------------------------------------------------------- read_run general
def test_unknown_extension_missing_and_empty(tmp_path):
    (tmp_path / "r.txt").write_text("1")
    with pytest.raises(RunFileError, match=r"extension '.txt' is not a run file format; "
                                           r"allowed: .wav, .csv, .npz, .mat"):
        read_run(tmp_path / "r.txt")
    with pytest.raises(RunFileError, match="'.none.'"):
        read_run(tmp_path / "r")
    with pytest.raises(RunFileError, match="no such file"):
        read_run(tmp_path / "nope.wav")
    (tmp_path / "e.csv").write_text("")
    with pytest.raises(RunFileError, match=r"is empty \(0 bytes\)"):
        read_run(tmp_path / "e.csv")
    (tmp_path / "x.wav").write_bytes(b"RIFF")
    with pytest.raises(InputError, match=r"^rate_hz = -5: must be a positive, finite sample rate \(Hz\)$"):
        read_run(tmp_path / "x.wav", rate_hz=-5)


# --------------------------------------------------------------------------- CSV
def test_csv_with_units_row_and_time_column(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("time_s,vib,tacho\ns,g,V\n0.0,0.1,0\n0.5,0.2,5\n1.0,0.3,0\n")
    run = read_run(p)
    assert run.rate_hz == pytest.approx(2.0)  # 1 / 0.5 s step (arithmetic)
    assert run.channels == (Channel("vib", "g"), Channel("tacho", "V"))
    np.testing.assert_array_equal(run.channel("vib"), [0.1, 0.2, 0.3])
    assert run.log[0][2]["units_row"] == {"time_s": "s", "vib": "g", "tacho": "V"}
    assert run.log[0][2]["time_column"] == "time_s"


def test_csv_without_time_needs_a_rate(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("a;b\n1;2\n3;4\n")  # semicolons
    with pytest.raises(RunFileError, match="gives no sample rate; pass --rate"):
        read_run(p)
    run = read_run(p, rate_hz=10)
    np.testing.assert_array_equal(run.data, [[1, 3], [2, 4]])
    (tmp_path / "r.json").write_text('{"rate_hz": 20}')
    assert read_run(p).rate_hz == 20.0


def test_csv_time_column_and_rate_argument_must_agree(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("T,a\n0,1\n0.25,2\n0.5,3\n")
    assert read_run(p, rate_hz=4.0).rate_hz == 4.0
    with pytest.raises(RunFileError, match="the CSV file says 4 Hz; --rate .rate_hz=. says 5 Hz"):
        read_run(p, rate_hz=5.0)


def test_csv_rate_from_printed_times_is_exact(tmp_path):
    p = tmp_path / "r.csv"
    t = np.arange(2000) / 12800.0  # here 1 / mean step is 12800.000000000002 in float64
    lines = "".join(f"{float(ti)!r},{np.sin(ti):.6f}\n" for ti in t)
    p.write_text("time_s,vib\n" + lines)
    run = read_run(p, rate_hz=12800)
    assert run.rate_hz == 12800.0  # float noise removed, so the run can be written as WAV
    assert run.n_samples == 2000


def test_csv_time_starting_late_is_logged(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("time,a\n10.0,1\n10.5,2\n")
    assert read_run(p).log[0][2]["time_start_s"] == 10.0


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("time_s,vib\n0,1\n0.1,2\n0.2,oops\n", r"line 4, column 'vib': 'oops' is not a number"),
        ("time_s,vib\ns,g\n0,1\n0.1,x2\n", r"line 4, column 'vib': 'x2' is not a number"),
        ("time_s,vib\n0,1\n0.1,2\n0.2,3\n0.35,4\n", r"line 5, column 'time_s': time step 0.15 s "
                                                    r"from the line before differs"),
        ("time_s,vib\n0,1\n0,2\n", "does not increase"),
        ("time_s,vib\n0,1\n", "one row only"),
        ("time_s,vib\n0,1\n,2\n", r"line 3, column 'time_s': the time is missing"),
        ("time_s,vib\nms,g\n0,1\n1,2\n", "time unit 'ms' is not supported; allowed: s"),
        ("time,t,vib\n0,0,1\n1,1,2\n", r"more than one time column \(time, t\)"),
        ("time_s\n0\n1\n", "has only a time column"),
        ("0.0,1.0\n0.1,2.0\n", "line 1 must be a header row .* the number '0.0'"),
        ("a,,b\n1,2,3\n", "line 1, column 2 has no name"),
        ("a,b,a\n1,2,3\n", r"names column\(s\) a more than once"),
        ("\n\n", "is empty; expected a header row"),
        ("time_s,vib\n", "holds no data rows"),
        ("time_s,vib\n0,1\n\n0.2,3\n", "line 3 is empty"),
        ("time_s,vib\n0,1\n0.1,\n0.2,3\n", r"channel 'vib' holds nan at sample 2 \(t = 0.1 s, "
                                           r"line 3\)"),
        ("time_s,vib\n0,1\n0.1,2,3,4\n", "cannot be parsed as CSV"),
    ],
)
def test_csv_errors(tmp_path, text, match):
    p = tmp_path / "r.csv"
    p.write_text(text)
    with pytest.raises(RunFileError, match=match):
        read_run(p)


def test_csv_not_utf8(tmp_path):
    p = tmp_path / "r.csv"
    p.write_bytes(b"a,b\n\xff\xfe,1\n")
    with pytest.raises(RunFileError, match="UTF-8"):
        read_run(p, rate_hz=1)


def test_csv_names_and_units_must_agree_with_sidecar(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("time_s,vib\ns,g\n0,1\n1,2\n")
    side = Sidecar(channels=(Channel("vibration", "g"),))
    with pytest.raises(RunFileError, match="named 'vibration' but .* names it 'vib'"):
        read_run(p, sidecar=side)
    side = Sidecar(channels=(Channel("vib", "m/s^2", 2.0),))
    with pytest.raises(RunFileError, match="unit 'm/s\\^2' but .*units row says 'g'"):
        read_run(p, sidecar=side)
    run = read_run(p, sidecar=Sidecar(channels=(Channel("vib", "", 2.0),)))
    assert run.channels == (Channel("vib", "g", 2.0),)  # unit filled from the units row


# --------------------------------------------------------------------------- NPZ
def test_npz_layouts(tmp_path):
    x = np.arange(20.0).reshape(2, 10)
    np.savez(tmp_path / "a.npz", data=x, rate_hz=100.0, channel_names=np.array(["u", "v"]))
    run = read_run(tmp_path / "a.npz")
    assert run.channel_names == ("u", "v") and run.rate_hz == 100.0
    np.testing.assert_array_equal(run.data, x)
    # samples x channels, recognised by the names
    np.savez(tmp_path / "b.npz", data=x.T, rate_hz=100, channel_names=np.array(["u", "v"]))
    run = read_run(tmp_path / "b.npz")
    np.testing.assert_array_equal(run.data, x)
    assert "transposed" in run.log[0][2]
    # no names: the longer axis is time
    np.savez(tmp_path / "c.npz", data=x.T, rate_hz=100)
    np.testing.assert_array_equal(read_run(tmp_path / "c.npz").data, x)
    # 1-D and integer data (values, converted unscaled)
    np.savez(tmp_path / "d.npz", data=np.array([1, 2, 3], dtype=np.int16), rate_hz=1, extra=1)
    run = read_run(tmp_path / "d.npz")
    np.testing.assert_array_equal(run.channel(1), [1.0, 2.0, 3.0])
    assert run.log[0][2]["ignored_keys"] == ["extra"]


def test_npz_pickled_object_array_is_refused(tmp_path):
    np.savez(tmp_path / "p.npz", data=np.array([{"a": 1}, None], dtype=object), rate_hz=1.0)
    with pytest.raises(RunFileError, match="key 'data' holds a pickled object array; refused"):
        read_run(tmp_path / "p.npz")


@pytest.mark.parametrize(
    ("arrays", "match"),
    [
        ({"rate_hz": 1.0}, r"missing key 'data' \(found: rate_hz\)"),
        ({"data": np.zeros((2, 5))}, "gives no sample rate; pass --rate"),
        ({"data": np.zeros((2, 5)), "rate_hz": [1.0, 2.0]}, "'rate_hz' must be one number"),
        ({"data": np.zeros((2, 5)), "rate_hz": 0.0}, r"r\.npz: key rate_hz = 0\.0: must be a positive, finite sample rate"),
        ({"data": np.zeros((2, 5)), "rate_hz": 1, "channel_names": np.array([1, 2])},
         "'channel_names' must be a 1-D string array"),
        ({"data": np.zeros((2, 5)), "rate_hz": 1, "channel_names": np.array(["a", "b", "c"])},
         r"shape \(2, 5\) but 3 channel names"),
        ({"data": np.zeros((2, 2, 2)), "rate_hz": 1}, r"shape \(2, 2, 2\)"),
        ({"data": np.zeros(3, dtype=complex), "rate_hz": 1}, "dtype complex128"),
        ({"data": np.array([0.0, np.inf]), "rate_hz": 4}, r"channel 'ch1' holds inf at sample 2 "
                                                          r"\(t = 0.25 s\)"),
    ],
)
def test_npz_errors(tmp_path, arrays, match):
    np.savez(tmp_path / "r.npz", **arrays)
    with pytest.raises(RunFileError, match=match):
        read_run(tmp_path / "r.npz")


def test_npz_not_an_archive(tmp_path):
    (tmp_path / "r.npz").write_bytes(b"not a zip file at all")
    with pytest.raises(RunFileError, match="cannot be read as a NumPy .npz archive"):
        read_run(tmp_path / "r.npz")
    np.save(tmp_path / "s.npy", np.zeros(3))
    (tmp_path / "s.npy").rename(tmp_path / "s.npz")
    with pytest.raises(RunFileError, match="holds a single array"):
        read_run(tmp_path / "s.npz")


def test_npz_orientation_from_sidecar_channel_count(tmp_path):
    x = np.arange(6.0).reshape(3, 2)  # 3 samples x 2 channels, more rows than columns
    np.savez(tmp_path / "r.npz", data=x.T.copy(), rate_hz=1)  # stored (2, 3) -> as is
    side = Sidecar(channels=(Channel("a"), Channel("b"), Channel("c")))
    # with three named channels the 3-long axis is the channel axis
    run = read_run(tmp_path / "r.npz", sidecar=side)
    np.testing.assert_array_equal(run.data, x)


# --------------------------------------------------------------------------- MAT
def test_mat_vectors_of_the_largest_length_become_channels(tmp_path):
    scipy.io.savemat(tmp_path / "m.mat", {"b_acc": np.arange(8.0), "a_acc": np.ones((8, 1)),
                                          "short": np.arange(3.0), "rpm": 1500,
                                          "image": np.zeros((3, 3)), "label": "text"})
    with pytest.raises(RunFileError, match="gives no sample rate; pass --rate"):
        read_run(tmp_path / "m.mat")
    run = read_run(tmp_path / "m.mat", rate_hz=8)
    assert run.channel_names == ("b_acc", "a_acc")  # file order
    np.testing.assert_array_equal(run.channel("b_acc"), np.arange(8.0))
    notes = run.log[0][2]
    assert notes["scalars"] == {"rpm": 1500.0}
    assert sorted(notes["ignored_variables"]) == ["image", "label", "short"]


def test_mat_errors(tmp_path):
    scipy.io.savemat(tmp_path / "m.mat", {"rpm": 1500, "label": "x"})
    with pytest.raises(RunFileError, match=r"holds no numeric vector .*variables: rpm, label"):
        read_run(tmp_path / "m.mat", rate_hz=1)
    (tmp_path / "bad.mat").write_bytes(b"definitely not matlab" * 10)
    with pytest.raises(RunFileError, match="cannot be read as a MATLAB .mat file"):
        read_run(tmp_path / "bad.mat", rate_hz=1)
    # a MAT v7.3 header: 116 text bytes, 8 subsystem bytes, version 0x0200, endian 'IM'
    text = b"MATLAB 7.3 MAT-file, Platform: GLNXA64, HDF5 schema 1.00".ljust(116)
    (tmp_path / "h5.mat").write_bytes(text + b"\x00" * 8 + b"\x00\x02IM" + b"\x00" * 400)
    with pytest.raises(RunFileError, match=r"v7.3 \(HDF5\) files are not supported"):
        read_run(tmp_path / "h5.mat", rate_hz=1)


@pytest.mark.skipif(not CWRU.is_file(), reason="CWRU recording not in /work/shared/data/cwru")
def test_cwru_file():
    run = read_run(CWRU, rate_hz=12000)
    assert run.channel_names == ("X105_DE_time", "X105_FE_time", "X105_BA_time")
    # data set README: about 121,000 samples per channel at 12 kHz, published speed 1797 rpm
    assert run.n_samples == 121265
    assert run.log[0][2]["scalars"] == {"X105RPM": 1797.0}
    ref = scipy.io.loadmat(CWRU)["X105_DE_time"][:, 0]  # scipy as the reference reader
    np.testing.assert_array_equal(run.channel("X105_DE_time"), ref)
    with pytest.raises(RunFileError, match="pass --rate"):
        read_run(CWRU)


def test_no_warning_when_machine_file_is_inside(tmp_path):
    (tmp_path / "m.toml").write_text("")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        write_run(_run(machine_file=str(tmp_path / "m.toml")), tmp_path / "r.npz")
