"""MAT run files (MATLAB 5 / v7): every numeric vector of the largest common length is a channel
named after its variable; scalars (such as a published rpm) go to the run's log.

MATLAB v7.3 files are HDF5 files of MATLAB's own layout and are refused with advice.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from workbench.errors import RunFileError
from workbench.runs.formats.base import FormatRead, ReadRequest

__all__ = ["read"]


# scipy's compiled MAT 5 reader can crash the interpreter (a segmentation fault) on a damaged
# file instead of raising, so the file is loaded in a child process that keeps only the numeric
# arrays and hands them back as an .npz archive (read with allow_pickle=False).
_MAT_CHILD = r"""
import sys
import numpy as np
import scipy.io
src, dst = sys.argv[1], sys.argv[2]
try:
    content = scipy.io.loadmat(src)
except NotImplementedError as exc:
    sys.stderr.write(f"v7.3: {exc}")
    sys.exit(3)
except Exception as exc:
    sys.stderr.write(f"{type(exc).__name__}: {exc}")
    sys.exit(4)
arrays, other = {}, []
for key, value in content.items():
    if key.startswith("__"):
        continue
    if isinstance(value, np.ndarray) and value.dtype.kind in "iuf":
        arrays["v_" + key] = value  # prefixed: a variable may be called e.g. allow_pickle
    else:
        other.append(key)
with open(dst, "wb") as f:
    np.savez(f, other=np.array(other, dtype=str), **arrays)
"""


def _loadmat_isolated(path: Path) -> tuple[dict[str, np.ndarray], list[str]]:
    """Numeric variables of a MAT file (in file order) and the names of the other variables."""
    import subprocess
    import sys
    import tempfile

    with tempfile.TemporaryDirectory(prefix="foldline_mat_") as tmp:
        out = Path(tmp) / "vars.npz"
        proc = subprocess.run([sys.executable, "-c", _MAT_CHILD, str(path), str(out)],
                              capture_output=True, text=True, stdin=subprocess.DEVNULL)
        err = proc.stderr.strip().splitlines()[-1] if proc.stderr.strip() else ""
        if proc.returncode == 3:
            raise RunFileError(f"{path}: MATLAB v7.3 (HDF5) files are not supported; save it "
                               "with save(..., '-v7') or export the channels to .npz")
        if proc.returncode == 4:
            raise RunFileError(f"{path}: cannot be read as a MATLAB .mat file ({err})")
        if proc.returncode != 0 or not out.is_file():
            raise RunFileError(f"{path}: cannot be read as a MATLAB .mat file (the MAT reader "
                               f"stopped with status {proc.returncode}: the file is damaged); "
                               "save it again or export the channels to .npz")
        with np.load(out, allow_pickle=False) as archive:
            arrays = {k[2:]: archive[k] for k in archive.files if k.startswith("v_")}
            other = [str(k) for k in archive["other"]]
    return arrays, other


def read(path: Path, request: ReadRequest) -> FormatRead:
    """Read a MAT run file (see the module notes); ``request`` is not used."""
    content, other = _loadmat_isolated(path)
    ignored = list(other)
    vectors: dict[str, np.ndarray] = {}
    scalars: dict[str, float] = {}
    for key, value in content.items():
        v = value.squeeze()
        if v.ndim == 0:
            scalars[key] = float(v)
        elif v.ndim == 1:
            vectors[key] = v
        else:
            ignored.append(key)
    if not vectors:
        raise RunFileError(f"{path}: holds no numeric vector to use as a channel (variables: "
                           f"{', '.join([*content, *other]) or 'none'})")
    length = max(v.size for v in vectors.values())
    names = [k for k, v in vectors.items() if v.size == length]
    ignored += [k for k, v in vectors.items() if v.size != length]
    data = np.empty((len(names), length), dtype=np.float64)
    for i, k in enumerate(names):
        data[i] = vectors[k]
    notes: dict[str, Any] = {}
    if scalars:
        notes["scalars"] = scalars
    if ignored:
        notes["ignored_variables"] = ignored
    return FormatRead(data, names=names, notes=notes)

