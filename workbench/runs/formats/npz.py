"""NPZ run files: a NumPy archive with ``data`` (channels x samples), ``rate_hz`` and
``channel_names``; written by :func:`workbench.runs.write_run`.

Pickled object arrays are refused (``allow_pickle=False``): loading a pickle can run code.
"""

from __future__ import annotations

import zipfile
import zlib
from pathlib import Path
from typing import Any

import numpy as np

from workbench.checks import FieldError, rate_hz
from workbench.errors import RunFileError
from workbench.fileio import atomic_output
from workbench.runs.formats.base import FormatRead, ReadRequest
from workbench.runs.run import Run, full_scale

__all__ = ["read", "write"]


def read(path: Path, request: ReadRequest) -> FormatRead:
    """Read an NPZ run file; ``request.n_channels`` (the sidecar's count) orients a 2-D array."""
    n_expected = request.n_channels
    try:
        archive = np.load(path, allow_pickle=False)
    except (OSError, ValueError, zipfile.BadZipFile, EOFError) as exc:
        raise RunFileError(f"{path}: cannot be read as a NumPy .npz archive ({exc})") from exc
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise RunFileError(f"{path}: holds a single array, not an .npz archive with keys 'data' "
                           "and 'rate_hz'")
    with archive:
        keys = list(archive.files)

        def get(key: str) -> np.ndarray:
            try:
                return archive[key]
            except ValueError as exc:
                if "pickle" not in str(exc):
                    raise RunFileError(f"{path}: key '{key}' is not a readable array ({exc}); "
                                       "the archive is damaged: write it again") from exc
                raise RunFileError(f"{path}: key '{key}' holds a pickled object array; refused, "
                                   "as loading a pickle can run code: store plain numeric "
                                   "arrays (and names as a string array)") from exc
            except (OSError, EOFError, zipfile.BadZipFile, zlib.error, NotImplementedError,
                    KeyError) as exc:  # a damaged member: bad CRC, cut-off or bad compression
                raise RunFileError(f"{path}: key '{key}' cannot be read ({exc}); the archive is "
                                   "damaged: write it again") from exc

        if "data" not in keys:
            raise RunFileError(f"{path}: missing key 'data' (found: {', '.join(keys) or 'none'});"
                               " expected 'data' (channels x samples) and 'rate_hz'")
        data = get("data")
        rate = None
        if "rate_hz" in keys:
            r = get("rate_hz")
            if r.size != 1 or r.dtype.kind not in "iuf":
                raise RunFileError(f"{path}: key 'rate_hz' must be one number, not {r.dtype} "
                                   f"of shape {r.shape}")
            try:
                rate = rate_hz(None, "rate_hz", float(r.reshape(())))
            except FieldError as exc:
                raise RunFileError(f"{path}: key {exc}") from None
        names = None
        if "channel_names" in keys:
            cn = get("channel_names")
            if cn.ndim != 1 or cn.dtype.kind not in "US":
                raise RunFileError(f"{path}: key 'channel_names' must be a 1-D string array, not "
                                   f"{cn.dtype} of shape {cn.shape}")
            names = [str(x.decode() if isinstance(x, bytes) else x) for x in cn]
        other = [k for k in keys if k not in ("data", "rate_hz", "channel_names")]
    notes: dict[str, Any] = {}
    if other:
        notes["ignored_keys"] = other
    if data.dtype.kind not in "iuf":
        raise RunFileError(f"{path}: key 'data' has dtype {data.dtype}; allowed: real numbers")
    if data.dtype.kind in "iu":
        data = data.astype(np.float64)  # stored numbers are values, not PCM codes
        notes["converted_integers_to_float64"] = True
    if data.ndim == 1:
        data = data.reshape(1, -1)
    elif data.ndim != 2:
        raise RunFileError(f"{path}: key 'data' has shape {data.shape}; allowed: (channels, "
                           "samples), (samples, channels) or (samples,)")
    else:
        k = len(names) if names is not None else n_expected
        a, b = data.shape
        if k is not None and k not in (a, b):
            raise RunFileError(f"{path}: key 'data' has shape {data.shape} but {k} channel names "
                               "are given; one axis must have one entry per channel")
        transpose = (b == k and a != k) if k is not None else a > b
        if transpose:
            data = data.T
            notes["transposed"] = f"data stored as samples x channels {(a, b)}"
    return FormatRead(data, rate_hz=rate, names=names, notes=notes)



def write(run: Run, path: Path, *, force: bool = False, sample_format: str = "float32") -> None:
    """Write ``run`` as an NPZ archive (``data``, ``rate_hz``, ``channel_names``), atomically.

    Float data keep their dtype; integer PCM codes become float64 fractions of full scale.
    ``sample_format`` is a WAV option and is not used.
    """
    data = run.data
    if data.dtype.kind == "i":
        data = data.astype(np.float64) / full_scale(data.dtype)
    with atomic_output(path, force=force) as tmp, open(tmp, "wb") as f:
        np.savez(f, data=np.asarray(data), rate_hz=np.float64(run.rate_hz),
                 channel_names=np.array(run.channel_names, dtype=str))
