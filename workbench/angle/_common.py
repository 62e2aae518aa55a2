"""Small helpers shared by the angle layer: 1-D signals and chunk streams.

Argument checks are :mod:`workbench.checks`'s.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

import numpy as np

from workbench.checks import show
from workbench.errors import InputError

#: Samples per internal chunk when a whole array is processed piece by piece.
CHUNK_SAMPLES = 1 << 20


def one_d(x, name: str) -> np.ndarray:
    """A 1-D float view (or copy when the dtype must change) of ``x``; never mutated later."""
    a = np.asarray(x)
    if a.ndim != 1:
        raise InputError(f"{name} has shape {a.shape}; allowed: a 1-D array (time on the only "
                         "axis)")
    if not (np.issubdtype(a.dtype, np.floating) or np.issubdtype(a.dtype, np.integer)):
        raise InputError(f"{name} has dtype {a.dtype}; allowed: real numbers")
    if not np.issubdtype(a.dtype, np.floating):
        a = a.astype(np.float64)
    return a


def iter_chunks(x, name: str = "x", chunk: int = CHUNK_SAMPLES) -> Iterator[np.ndarray]:
    """Yield 1-D chunks of a signal given as an array, an iterable of arrays or a callable.

    Parameters
    ----------
    x : array_like, iterable of array_like, or callable
        A whole 1-D signal; or consecutive 1-D chunks of it (any lengths); or a callable taking
        no argument and returning such an iterable (so a reader can be opened lazily).
    name : str
        Name used in error messages.
    chunk : int
        Chunk length used to cut a whole array.
    """
    if callable(x) and not isinstance(x, np.ndarray):
        x = x()
    if isinstance(x, np.ndarray) or (isinstance(x, (list, tuple)) and len(x) > 0
                                     and np.isscalar(x[0])):
        a = one_d(x, name)
        for i in range(0, len(a), chunk):
            yield a[i:i + chunk]
        return
    if not isinstance(x, Iterable):
        raise InputError(f"{name} = {show(x)}: must be a 1-D array, "
                         "an iterable of 1-D arrays, or a callable returning one")
    for i, c in enumerate(x):
        yield one_d(c, f"{name} chunk {i}")
