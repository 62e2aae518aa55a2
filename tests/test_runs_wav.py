"""Tests of workbench.runs.formats.wav: header parsing, memory-mapped reading, the streaming writer.

scipy.io.wavfile (a general-purpose reference library) reads and writes the same files
independently; Python's standard ``wave`` module writes plain 8- and 24-bit PCM files.
"""

from __future__ import annotations

import struct
import wave

import numpy as np
import pytest
import scipy.io.wavfile as wavfile

from workbench.errors import InputError, RunFileError
from workbench.runs.formats.wav import WavWriter, read_wav, read_wav_info

# scipy returns int24 as int32 codes shifted left by 8 bits, so every integer format divides by
# 2**(container bits - 1) (scipy.io.wavfile documentation).
_SCIPY_SCALE = {"int16": 2.0**15, "int24": 2.0**31, "int32": 2.0**31, "float32": 1.0}
_LSB = {"int16": 2.0**-15, "int24": 2.0**-23, "int32": 2.0**-31, "float32": 2.0**-23}


def _signal(n_ch=3, n=2001, seed=0):
    return np.random.default_rng(seed).uniform(-0.999, 0.999, (n_ch, n))


def _ours(data):
    from workbench.runs.run import full_scale

    return np.asarray(data, dtype=np.float64) / full_scale(data.dtype)


@pytest.mark.parametrize("fmt", ["int16", "int24", "int32", "float32"])
def test_round_trip_against_scipy(tmp_path, fmt):
    x = _signal()
    path = tmp_path / f"{fmt}.wav"
    with WavWriter(path, 12800, 3, sample_format=fmt) as w:
        w.write(x[:, :700])  # several chunks, uneven sizes
        w.write(x[:, 700:701])
        w.write(x[:, 701:])
    rate, ref = wavfile.read(path)
    data, info = read_wav(path)
    assert rate == 12800 and info.rate_hz == 12800.0
    assert info.n_channels == 3 and info.n_frames == 2001 and info.sample_format == fmt
    # same samples as scipy reads from the same file
    np.testing.assert_array_equal(_ours(data), ref.T / _SCIPY_SCALE[fmt])
    # within half a code of what was written (rounding to nearest)
    assert np.max(np.abs(_ours(data) - x)) <= 0.5 * _LSB[fmt] * (1 + 1e-9)


@pytest.mark.parametrize(("fmt", "dtype"), [("int16", np.int16), ("int32", np.int32),
                                            ("float32", np.float32)])
def test_memory_mapped_formats(tmp_path, fmt, dtype):
    path = tmp_path / "m.wav"
    with WavWriter(path, 1000, 2, sample_format=fmt) as w:
        w.write(_signal(2, 100))
    data, _ = read_wav(path)
    assert isinstance(data, np.memmap)
    assert data.dtype == dtype and data.shape == (2, 100)
    assert not data.flags.writeable


def test_int24_is_converted_to_float32(tmp_path):
    path = tmp_path / "m.wav"
    with WavWriter(path, 1000, 1, sample_format="int24") as w:
        w.write(np.array([[-1.0, -0.5, 0.0, 0.5, 1.0]]))
    data, _ = read_wav(path)
    assert data.dtype == np.float32 and not isinstance(data, np.memmap)
    # +1.0 saturates to the largest code 2**23 - 1 (documented); others are exact
    np.testing.assert_array_equal(data[0], [-1.0, -0.5, 0.0, 0.5, (2**23 - 1) / 2**23])


@pytest.mark.parametrize(("dtype", "fmt"), [(np.int16, "int16"), (np.int32, "int32"),
                                            (np.float32, "float32"), (np.float64, "float64")])
def test_reads_plain_files_written_by_scipy(tmp_path, dtype, fmt):
    x = _signal(2, 300)
    arr = (x.T * (2.0 ** (8 * np.dtype(dtype).itemsize - 1) - 1)).astype(dtype) \
        if np.dtype(dtype).kind == "i" else x.T.astype(dtype)
    path = tmp_path / "s.wav"
    wavfile.write(path, 8000, arr)  # plain WAVE_FORMAT_PCM / IEEE_FLOAT header
    data, info = read_wav(path)
    assert info.format_tag in (1, 3) and info.sample_format == fmt
    np.testing.assert_array_equal(np.asarray(data), arr.T)


def test_reads_plain_int24_written_by_stdlib_wave(tmp_path):
    codes = np.array([[-(2**23), 2**23 - 1], [1, -1], [12345, -54321]], dtype=np.int32)
    raw = codes.astype("<i4").view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
    path = tmp_path / "w24.wav"
    with wave.open(str(path), "wb") as w:
        w.setnchannels(2)
        w.setsampwidth(3)
        w.setframerate(44100)
        w.writeframes(raw)
    data, info = read_wav(path)
    assert info.format_tag == 1 and info.sample_format == "int24"
    np.testing.assert_array_equal(data, codes.T / 2.0**23)


def test_unknown_chunks_are_skipped_and_odd_sizes_padded(tmp_path):
    # odd data size: 3-byte mono samples, 5 frames -> 15 bytes + pad byte (RIFF word alignment)
    path = tmp_path / "odd.wav"
    with WavWriter(path, 100, 1, sample_format="int24") as w:
        w.write(np.full((1, 5), 0.25))
    assert path.stat().st_size % 2 == 0
    rate, ref = wavfile.read(path)
    assert ref.shape == (5,)
    # insert an odd-sized LIST chunk before 'data'
    blob = path.read_bytes()
    i = blob.index(b"data")
    extra = b"LIST" + struct.pack("<I", 3) + b"abc" + b"\x00"
    blob = blob[:4] + struct.pack("<I", len(blob) - 8 + len(extra)) + blob[8:i] + extra + blob[i:]
    path.write_bytes(blob)
    data, info = read_wav(path)
    np.testing.assert_array_equal(data, np.full((1, 5), 0.25, dtype=np.float32))


def _header(fmt_chunk, data_bytes, payload=b"", extra=b""):
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt_chunk)) + fmt_chunk + extra \
        + b"data" + struct.pack("<I", data_bytes) + payload
    return b"RIFF" + struct.pack("<I", len(body)) + body


def _fmt(tag=1, ch=1, rate=1000, bits=16, block=None):
    block = ch * bits // 8 if block is None else block
    return struct.pack("<HHIIHH", tag, ch, rate, rate * block, block, bits)


@pytest.mark.parametrize(
    ("blob", "match"),
    [
        (b"", "is empty"),
        (b"OggS" + b"\x00" * 40, r"not a RIFF/WAVE file \(starts with b'OggS'"),
        (b"RIFF\x00\x00", "truncated header: 6 bytes"),
        (b"RIFF" + b"\x00" * 4 + b"AVI " + b"\x00" * 8, "of type b'AVI '"),
        (b"RF64" + b"\x00" * 40, "RF64 file"),
        (b"RIFF\x20\x00\x00\x00WAVEfmt ", "chunk header at byte 12 is cut off"),
        (b"RIFF\x20\x00\x00\x00WAVEfmt \x08\x00\x00\x00" + b"\x00" * 8, "'fmt ' chunk has 8"),
        (_header(_fmt(), 0)[:-8] + b"LIST\x00\x00\x00\x00", "no 'data' chunk"),
        (b"RIFF\x10\x00\x00\x00WAVEdata\x02\x00\x00\x00\x00\x00", "no 'fmt ' chunk"),
        (_header(_fmt(), 2000, b"\x00" * 800), r"claims 1000 frames \(2000 bytes\) but the file "
                                               r"holds only 400 complete frames"),
        (_header(_fmt(tag=2), 2, b"\x00\x00"), "format tag 0x0002 is not supported"),
        (_header(_fmt(bits=20), 2, b"\x00\x00"), "PCM with 20 bits per sample"),
        (_header(_fmt(tag=3, bits=16), 2, b"\x00\x00"), "IEEE float with 16 bits"),
        (_header(_fmt(ch=0, block=2), 2, b"\x00\x00"), "0 channels"),
        (_header(_fmt(rate=0), 2, b"\x00\x00"), r"header: rate_hz = 0: must be a positive, finite sample rate \(Hz\)"),
        (_header(_fmt(block=4), 4, b"\x00" * 4), "block align 4 bytes does not match"),
        (_header(_fmt(), 0), "holds no samples"),
        (_header(_fmt(tag=0xFFFE), 2, b"\x00\x00"), "EXTENSIBLE 'fmt ' chunk has 16 bytes"),
        (_header(_fmt(tag=0xFFFE) + struct.pack("<HHI", 22, 16, 0) + b"\x01\x00" + b"\x11" * 14,
                 2, b"\x00\x00"), "sub-format 0100(11)+ is not supported"),
    ],
)
def test_header_errors(tmp_path, blob, match):
    path = tmp_path / "bad.wav"
    path.write_bytes(blob)
    with pytest.raises(RunFileError, match=match):
        read_wav_info(path)


def test_unsupported_bit_depth_from_stdlib_wave(tmp_path):
    path = tmp_path / "u8.wav"
    with wave.open(str(path), "wb") as w:  # 8-bit unsigned PCM, a real but unsupported format
        w.setnchannels(1)
        w.setsampwidth(1)
        w.setframerate(8000)
        w.writeframes(bytes(range(10)))
    with pytest.raises(RunFileError, match="PCM with 8 bits per sample is not supported"):
        read_wav(path)


def test_missing_file():
    with pytest.raises(RunFileError, match="cannot be opened"):
        read_wav_info("/nonexistent/x.wav")


def test_writer_validation(tmp_path):
    p = tmp_path / "w.wav"
    with pytest.raises(InputError, match='sample_format = "int8": must be one of "int16", "int24"'):
        WavWriter(p, 100, 1, sample_format="int8")
    with pytest.raises(InputError, match=r"rate_hz = 100\.5: cannot be stored.*\.npz"):
        WavWriter(p, 100.5, 1)
    with pytest.raises(InputError, match="rate_hz = 0: cannot be stored"):
        WavWriter(p, 0, 1)
    with pytest.raises(InputError, match="n_channels = 0: must be a positive integer"):
        WavWriter(p, 100, 0)
    with pytest.raises(InputError, match="outside its 'with' block"):
        WavWriter(p, 100, 1).write(np.zeros(3))
    assert not p.exists()


@pytest.mark.parametrize(
    ("chunk", "fmt", "match"),
    [
        (np.zeros((3, 4)), "float32", r"shape \(3, 4\) does not fit 2 channel"),
        (np.array([[0.0, np.nan], [0.0, 0.0]]), "float32", "channel 'a' has a non-finite value"),
        (np.array([[0.0, 0.0], [0.5, -1.25]]), "int16", "channel 'b' reaches 1.25 of full scale"),
    ],
)
def test_writer_refuses_bad_chunks_and_leaves_no_file(tmp_path, chunk, fmt, match):
    p = tmp_path / "w.wav"
    with pytest.raises(InputError, match=match):
        with WavWriter(p, 100, 2, sample_format=fmt, channel_names=("a", "b")) as w:
            w.write(np.zeros((2, 10)))
            w.write(chunk)
    assert list(tmp_path.iterdir()) == []


def test_writer_with_no_frames_leaves_no_file(tmp_path):
    p = tmp_path / "w.wav"
    with pytest.raises(InputError, match="no frames were written"):
        with WavWriter(p, 100, 1):
            pass
    assert list(tmp_path.iterdir()) == []


def test_writer_refuses_existing_file(tmp_path):
    from workbench.errors import OutputExistsError

    p = tmp_path / "w.wav"
    p.write_bytes(b"keep")
    with pytest.raises(OutputExistsError, match="pass --force"):
        with WavWriter(p, 100, 1) as w:
            w.write(np.zeros(3))
    assert p.read_bytes() == b"keep"
    with WavWriter(p, 100, 1, force=True) as w:
        w.write(np.zeros(3))
    assert wavfile.read(p)[1].shape == (3,)


def test_integer_chunks_are_pcm_codes(tmp_path):
    p = tmp_path / "w.wav"
    codes = np.array([[-32768, -1, 0, 1, 32767]], dtype=np.int16)
    with WavWriter(p, 100, 1, sample_format="int16") as w:
        w.write(codes)
    np.testing.assert_array_equal(wavfile.read(p)[1], codes[0])
