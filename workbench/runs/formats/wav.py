"""WAV (RIFF/WAVE) files: a header parser, a memory-mapping reader and a streaming writer.

Why our own parser rather than :func:`scipy.io.wavfile.read`: scipy can memory-map int16,
int32 and float files, but not 24-bit ones, and it reports a truncated data chunk with a warning
and a shortened array rather than an error naming what the header claims and what the file holds.
A measurement file that was cut off (a recorder that lost power) must be refused with a clear
message, and a multi-gigabyte recording must not be read into memory.  The RIFF layout is small
(Microsoft/IBM, "Multimedia Programming Interface and Data Specifications 1.0", 1991; Microsoft,
"WAVEFORMATEXTENSIBLE", Windows documentation), so we parse it here with :mod:`struct` and map the
samples with :class:`numpy.memmap`.  scipy.io.wavfile stays our independent reference in the
tests.

Supported sample formats: PCM int16, int24 (3-byte, converted chunk by chunk into float32, which
holds every 24-bit code exactly), int32, IEEE float32 and float64, under the format tags
WAVE_FORMAT_PCM (1), WAVE_FORMAT_IEEE_FLOAT (3) and WAVE_FORMAT_EXTENSIBLE (0xFFFE), any number
of channels.  int16, int32, float32 and float64 are memory-mapped read-only.  RF64 (files over
4 GiB) is not supported.
"""

from __future__ import annotations

import math
import os
import struct
from dataclasses import dataclass
from pathlib import Path
from types import TracebackType
from typing import BinaryIO

import numpy as np

from workbench.checks import RATE_RULE, choice, describe, positive_int
from workbench.errors import InputError, RunFileError
from workbench.fileio import atomic_output
from workbench.runs.formats.base import FormatRead, ReadRequest
from workbench.runs.run import Run, full_scale

__all__ = ["SAMPLE_FORMATS", "WavInfo", "read_wav_info", "read_wav", "WavWriter", "read", "write"]

WAVE_FORMAT_PCM = 0x0001
WAVE_FORMAT_IEEE_FLOAT = 0x0003
WAVE_FORMAT_EXTENSIBLE = 0xFFFE
# KSDATAFORMAT_SUBTYPE_* GUIDs share this tail after the 2-byte format code (little-endian).
_GUID_TAIL = b"\x00\x00\x00\x00\x10\x00\x80\x00\x00\xaa\x00\x38\x9b\x71"

#: Sample formats foldline reads and writes: name -> (format code, bits, numpy dtype of a sample).
SAMPLE_FORMATS = {
    "int16": (WAVE_FORMAT_PCM, 16, "<i2"),
    "int24": (WAVE_FORMAT_PCM, 24, None),
    "int32": (WAVE_FORMAT_PCM, 32, "<i4"),
    "float32": (WAVE_FORMAT_IEEE_FLOAT, 32, "<f4"),
    "float64": (WAVE_FORMAT_IEEE_FLOAT, 64, "<f8"),
}
_WRITABLE = ("int16", "int24", "int32", "float32")
_MAX_RIFF = 2**32 - 1
_CHUNK_FRAMES = 1 << 18


@dataclass(frozen=True)
class WavInfo:
    """What a WAV header says.

    Parameters
    ----------
    path : str
        File name.
    rate_hz : float
        Sample rate in Hz.
    n_channels : int
        Channels per frame.
    n_frames : int
        Complete frames (samples per channel) in the data chunk.
    sample_format : str
        One of ``"int16"``, ``"int24"``, ``"int32"``, ``"float32"``, ``"float64"``.
    format_tag : int
        1 (PCM), 3 (IEEE float) or 0xFFFE (extensible).
    data_offset : int
        Byte offset of the first sample.
    """

    path: str
    rate_hz: float
    n_channels: int
    n_frames: int
    sample_format: str
    format_tag: int
    data_offset: int

    @property
    def bytes_per_sample(self) -> int:
        """Bytes of one sample of one channel."""
        return SAMPLE_FORMATS[self.sample_format][1] // 8

    @property
    def block_align(self) -> int:
        """Bytes per frame."""
        return self.bytes_per_sample * self.n_channels


def _fail(path: Path, what: str) -> RunFileError:
    return RunFileError(f"{path}: {what}")


def read_wav_info(path: str | os.PathLike) -> WavInfo:
    """Parse a WAV header and check it against the file's size.

    Parameters
    ----------
    path : path-like
        WAV file.

    Returns
    -------
    WavInfo

    Raises
    ------
    RunFileError
        Empty file, not RIFF/WAVE, truncated header, a data chunk claiming more frames than the
        file holds, unsupported format tag or bit depth, zero channels or zero rate.
    """
    path = Path(path)
    try:
        size = path.stat().st_size
        f = open(path, "rb")
    except OSError as exc:
        raise _fail(path, f"cannot be opened ({exc.strerror})") from exc
    with f:
        return _parse(path, f, size)


def _parse(path: Path, f: BinaryIO, size: int) -> WavInfo:
    if size == 0:
        raise _fail(path, "is empty (0 bytes); expected a RIFF/WAVE file")
    head = f.read(12)
    if head[:4] in (b"RF64", b"RIFX", b"BW64"):
        raise _fail(path, f"is a {head[:4].decode()} file; only little-endian RIFF/WAVE files "
                          "under 4 GiB are supported")
    if head[:4] != b"RIFF":
        raise _fail(path, f"is not a RIFF/WAVE file (starts with {head[:4]!r}, expected b'RIFF')")
    if len(head) < 12:
        raise _fail(path, f"truncated header: {size} bytes, a RIFF/WAVE header needs at least 12")
    if head[8:12] != b"WAVE":
        raise _fail(path, f"is a RIFF file of type {head[8:12]!r}, not b'WAVE'")
    fmt = None
    data = None  # (offset, claimed bytes)
    pos = 12
    while pos < size and (fmt is None or data is None):
        f.seek(pos)
        hdr = f.read(8)
        if len(hdr) < 8:
            if fmt is not None and data is not None:
                break
            raise _fail(path, f"truncated header: the chunk header at byte {pos} is cut off "
                              f"({len(hdr)} of 8 bytes)")
        cid, csize = struct.unpack("<4sI", hdr)
        body = pos + 8
        if cid == b"fmt ":
            if csize < 16 or body + csize > size:
                have = min(csize, size - body)
                raise _fail(path, f"truncated header: the 'fmt ' chunk has {have} bytes, at "
                                  "least 16 are needed")
            fmt = f.read(csize)
        elif cid == b"data":
            data = (body, csize)
            if body + csize > size:
                break  # nothing beyond a truncated data chunk; reported below
        pos = body + csize + (csize & 1)
    if fmt is None:
        raise _fail(path, "has no 'fmt ' chunk before the end of the file (truncated header?)")
    if data is None:
        raise _fail(path, "has no 'data' chunk")
    tag, n_ch, rate, _byte_rate, block_align, bits = struct.unpack("<HHIIHH", fmt[:16])
    code = tag
    if tag == WAVE_FORMAT_EXTENSIBLE:
        if len(fmt) < 40:
            raise _fail(path, f"truncated header: WAVE_FORMAT_EXTENSIBLE 'fmt ' chunk has "
                              f"{len(fmt)} bytes, 40 are needed")
        guid = fmt[24:40]
        code = struct.unpack("<H", guid[:2])[0]
        if guid[2:] != _GUID_TAIL:
            raise _fail(path, f"WAVE_FORMAT_EXTENSIBLE sub-format {guid.hex()} is not supported; "
                              "allowed: PCM or IEEE float")
    names = {(WAVE_FORMAT_PCM, 16): "int16", (WAVE_FORMAT_PCM, 24): "int24",
             (WAVE_FORMAT_PCM, 32): "int32", (WAVE_FORMAT_IEEE_FLOAT, 32): "float32",
             (WAVE_FORMAT_IEEE_FLOAT, 64): "float64"}
    if code not in (WAVE_FORMAT_PCM, WAVE_FORMAT_IEEE_FLOAT):
        raise _fail(path, f"format tag 0x{code:04X} is not supported; allowed: PCM (1), IEEE "
                          "float (3), or WAVE_FORMAT_EXTENSIBLE (0xFFFE) holding either")
    if (code, bits) not in names:
        kind = "PCM" if code == WAVE_FORMAT_PCM else "IEEE float"
        allowed = "16, 24, 32" if code == WAVE_FORMAT_PCM else "32, 64"
        raise _fail(path, f"{kind} with {bits} bits per sample is not supported; allowed: "
                          f"{allowed}")
    sample_format = names[(code, bits)]
    if n_ch == 0:
        raise _fail(path, "header says 0 channels; a run needs at least one")
    if rate == 0:
        raise _fail(path, f"header: {describe('rate_hz', 0, RATE_RULE)}")
    if block_align != n_ch * bits // 8:
        raise _fail(path, f"header block align {block_align} bytes does not match {n_ch} "
                          f"channel(s) x {bits // 8} bytes")
    offset, claimed = data
    available = size - offset
    claimed_frames = claimed // block_align
    if claimed > available:
        raise _fail(path, f"the data chunk claims {claimed_frames} frames ({claimed} bytes) but "
                          f"the file holds only {available // block_align} complete frames "
                          f"({available} bytes) after the header; the file is truncated")
    if claimed_frames == 0:
        raise _fail(path, "the data chunk holds no samples")
    return WavInfo(str(path), float(rate), n_ch, claimed_frames, sample_format, tag, offset)


def read_wav(path: str | os.PathLike) -> tuple[np.ndarray, WavInfo]:
    """Read the samples of a WAV file, memory-mapped where the format allows.

    Parameters
    ----------
    path : path-like
        WAV file.

    Returns
    -------
    data : ndarray, shape (n_channels, n_frames)
        int16/int32 PCM codes or float32/float64 values as a read-only :class:`numpy.memmap`
        (a strided view of the interleaved file); for int24, a float32 array of full-scale
        fractions (code / 2**23), converted in chunks of 2**18 frames.
    info : WavInfo

    Raises
    ------
    RunFileError
        See :func:`read_wav_info`.
    """
    info = read_wav_info(path)
    shape = (info.n_frames, info.n_channels)
    dtype = SAMPLE_FORMATS[info.sample_format][2]
    if dtype is not None:
        mm = np.memmap(path, dtype=dtype, mode="r", offset=info.data_offset, shape=shape)
        return mm.T, info
    raw = np.memmap(path, dtype=np.uint8, mode="r", offset=info.data_offset,
                    shape=(info.n_frames, info.n_channels, 3))
    out = np.empty((info.n_channels, info.n_frames), dtype=np.float32)
    for a in range(0, info.n_frames, _CHUNK_FRAMES):
        b = min(a + _CHUNK_FRAMES, info.n_frames)
        block = raw[a:b].astype(np.int32)
        codes = block[..., 0] | (block[..., 1] << 8) | (block[..., 2] << 16)
        codes = (codes << 8) >> 8  # sign-extend 24 -> 32 bits
        out[:, a:b] = (codes.T * (1.0 / 2**23)).astype(np.float32)
    del raw
    return out, info


class WavWriter:
    """Write a WAV file chunk by chunk, without holding the run in memory.

    The file is written under a temporary name through
    :func:`~workbench.fileio.atomic_output`; the header's sizes are patched when the context
    closes and the file is then renamed into place.  If the body raises, nothing is left behind.
    The header is WAVE_FORMAT_EXTENSIBLE (as the format's documentation asks for more than two
    channels or more than 16 bits) with channel mask 0 (measurement channels, no speaker
    positions) and, for float data, a ``fact`` chunk.

    Parameters
    ----------
    path : path-like
        Output ``.wav`` file.
    rate_hz : float
        Sample rate in Hz; WAV stores whole numbers, so it must be an integer value.
    n_channels : int
        Channels per frame, >= 1.
    sample_format : {"float32", "int16", "int24", "int32"}, optional
        Stored sample format.  Default ``"float32"``.
    force : bool, optional
        Overwrite an existing file.
    channel_names : sequence of str, optional
        Used in error messages only.

    Examples
    --------
    >>> with WavWriter("run.wav", 12800, 2) as w:         # doctest: +SKIP
    ...     for block in blocks:                            # each (2, n) in full-scale units
    ...         w.write(block)
    """

    def __init__(self, path: str | os.PathLike, rate_hz: float, n_channels: int, *,
                 sample_format: str = "float32", force: bool = False,
                 channel_names: tuple[str, ...] | None = None) -> None:
        choice(None, "sample_format", sample_format, _WRITABLE)
        if (isinstance(rate_hz, bool) or not isinstance(rate_hz, (int, float, np.number))
                or not math.isfinite(rate_hz) or rate_hz <= 0 or rate_hz != int(rate_hz)
                or rate_hz > _MAX_RIFF):
            raise InputError(f"{path}: " + describe(
                "rate_hz", rate_hz, "cannot be stored in a WAV file; allowed: a whole number of "
                "Hz from 1 to 4294967295 (write an .npz file for other rates)"))
        positive_int(None, "n_channels", n_channels, high=65535, whole_float=False)
        self.path = Path(path)
        self.rate_hz = int(rate_hz)
        self.n_channels = n_channels
        self.sample_format = sample_format
        self.force = force
        self.channel_names = tuple(channel_names) if channel_names else tuple(
            str(i + 1) for i in range(n_channels))
        code, bits, _ = SAMPLE_FORMATS[sample_format]
        self._code, self._bits = code, bits
        self._block = n_channels * bits // 8
        self._ctx = None
        self._f: BinaryIO | None = None
        self.frames_written = 0
        self._fact_pos: int | None = None
        self._data_pos = 0

    # ----------------------------------------------------------------- context protocol
    def __enter__(self) -> WavWriter:
        self._ctx = atomic_output(self.path, force=self.force)
        tmp = self._ctx.__enter__()
        try:
            self._f = open(tmp, "wb")
            self._write_header()
        except BaseException as exc:
            self._abort(exc)
            raise
        return self

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> bool:
        if exc is None:
            try:
                self._finish()
            except BaseException as err:
                self._abort(err)
                raise
            ctx, self._ctx = self._ctx, None
            ctx.__exit__(None, None, None)
            return False
        self._abort(exc)
        return False

    def _abort(self, exc: BaseException) -> None:
        if self._f is not None:
            self._f.close()
            self._f = None
        if self._ctx is not None:
            ctx, self._ctx = self._ctx, None
            try:
                ctx.__exit__(type(exc), exc, exc.__traceback__)
            except BaseException as again:  # the same exception re-raised by the context
                if again is not exc:
                    raise

    # ----------------------------------------------------------------- writing
    def _write_header(self) -> None:
        f = self._f
        byte_rate = self.rate_hz * self._block
        guid = struct.pack("<H", self._code) + _GUID_TAIL
        fmt = struct.pack("<HHIIHHHHI", WAVE_FORMAT_EXTENSIBLE, self.n_channels, self.rate_hz,
                          byte_rate, self._block, self._bits, 22, self._bits, 0) + guid
        f.write(b"RIFF" + struct.pack("<I", 0) + b"WAVE")
        f.write(b"fmt " + struct.pack("<I", len(fmt)) + fmt)
        if self._code == WAVE_FORMAT_IEEE_FLOAT:
            self._fact_pos = f.tell() + 8
            f.write(b"fact" + struct.pack("<II", 4, 0))
        f.write(b"data" + struct.pack("<I", 0))
        self._data_pos = f.tell()

    def write(self, chunk: np.ndarray) -> None:
        """Append frames.

        Parameters
        ----------
        chunk : array_like, shape (n_channels, n) or (n,) for one channel
            Raw values as fractions of full scale (integer arrays are PCM codes of their own
            width and are converted by :func:`~workbench.runs.run.full_scale`).  For integer
            sample formats the values must lie in [-1, 1]; +1.0 is stored as the largest code.

        Raises
        ------
        InputError
            Wrong shape, a non-finite value, a value out of [-1, 1] for an integer format, or
            more than 4 GiB of data.
        """
        if self._f is None:
            raise InputError("WavWriter.write called outside its 'with' block")
        x = np.asarray(chunk)
        if x.ndim == 1 and self.n_channels == 1:
            x = x.reshape(1, -1)
        if x.ndim != 2 or x.shape[0] != self.n_channels:
            raise InputError(f"{self.path}: chunk of shape {x.shape} does not fit "
                             f"{self.n_channels} channel(s); allowed: ({self.n_channels}, n)")
        if x.shape[1] == 0:
            return
        x = x.astype(np.float64) / full_scale(x.dtype) if x.dtype.kind == "i" else x
        finite = np.isfinite(x)
        if not finite.all():
            row, col = np.argwhere(~finite)[0]
            raise InputError(f"{self.path}: channel '{self.channel_names[row]}' has a non-finite "
                             f"value ({x[row, col]}) at frame {self.frames_written + col}; "
                             "WAV files hold finite values only")
        if self._code == WAVE_FORMAT_PCM:
            peak = np.max(np.abs(x), axis=1)
            if np.any(peak > 1.0):
                row = int(np.argmax(peak))
                raise InputError(f"{self.path}: channel '{self.channel_names[row]}' reaches "
                                 f"{peak[row]:.6g} of full scale; {self.sample_format} holds "
                                 "values in [-1, 1]: scale the data (and the channel's "
                                 "sensitivity with it) or write float32")
            fs = 2.0 ** (self._bits - 1)
            codes = np.ascontiguousarray(np.clip(np.rint(x.T * fs), -fs, fs - 1), dtype="<i4")
            if self._bits == 16:
                payload = codes.astype("<i2").tobytes()
            elif self._bits == 24:
                payload = codes.view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
            else:
                payload = codes.tobytes()
        else:
            payload = np.ascontiguousarray(x.T, dtype="<f4").tobytes()
        total = self._data_pos + (self.frames_written + x.shape[1]) * self._block
        if total + 1 > _MAX_RIFF:
            raise InputError(f"{self.path}: more than 4 GiB of samples; a WAV file cannot hold "
                             "them: split the run into shorter files")
        self._f.write(payload)
        self.frames_written += x.shape[1]

    def _finish(self) -> None:
        if self.frames_written == 0:
            raise InputError(f"{self.path}: no frames were written; a WAV file needs at least one")
        f = self._f
        data_bytes = self.frames_written * self._block
        if data_bytes & 1:
            f.write(b"\x00")  # RIFF chunks are word aligned; the pad byte is not data
        end = f.tell()
        f.seek(4)
        f.write(struct.pack("<I", end - 8))
        if self._fact_pos is not None:
            f.seek(self._fact_pos)
            f.write(struct.pack("<I", self.frames_written))
        f.seek(self._data_pos - 4)
        f.write(struct.pack("<I", data_bytes))
        f.close()
        self._f = None


# --------------------------------------------------------------------------- format plug-in
_WRITE_CHUNK = 1 << 16


def read(path: Path, request: ReadRequest) -> FormatRead:
    """Read a WAV run file for :func:`workbench.runs.read_run` (memory-mapped, see
    :func:`read_wav`); the rate comes from the header, names and units from the sidecar.
    ``request`` is not used."""
    data, info = read_wav(path)
    return FormatRead(data, rate_hz=info.rate_hz, notes={"sample_format": info.sample_format})


def write(run: Run, path: Path, *, force: bool = False, sample_format: str = "float32") -> None:
    """Write ``run`` as a WAV file, streamed in chunks of 65,536 samples (a memory-mapped run
    is never loaded whole); names and units go to the sidecar."""
    with WavWriter(path, run.rate_hz, run.n_channels, sample_format=sample_format,
                   force=force, channel_names=run.channel_names) as w:
        for a in range(0, run.n_samples, _WRITE_CHUNK):
            w.write(run.data[:, a:a + _WRITE_CHUNK])
