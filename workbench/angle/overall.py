"""Overall vibration level against speed: the RMS of the channel per time block, binned on rpm.

The overall level is the first curve an analyst looks at in a run-up: where does the machine
get loud, and does any order explain it?  It is computed in the time domain (the mean square
of each block, its mean removed), so it holds every component, synchronous or not, orders the
order map does not show included.  With a band it is the mean square of the block's spectrum
inside the band (Parseval), with a Hann window.

Blocks are averaged on mean square into rpm bins, the same bins as the order map's rows when
their edges are given, so the overall curve and the order cuts share an rpm axis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from workbench import checks
from workbench.checks import show
from workbench.angle._common import iter_chunks
from workbench.angle.shaft_angle import ShaftAngle
from workbench.errors import InputError

__all__ = ["OverallLevel", "overall_level", "rpm_edges_from_centres", "default_block_samples"]


@dataclass(frozen=True, eq=False)
class OverallLevel:
    """Overall RMS of a channel against speed.

    Attributes
    ----------
    rpm : ndarray, shape (n,)
        Speed of each row, rpm (bin centre, or the mean speed of the blocks in the bin).
    rms : ndarray, shape (n,)
        RMS level (the channel's unit), blocks averaged on mean square; NaN in an empty bin.
    n_blocks : ndarray of int, shape (n,)
        Blocks in each row.
    block_s : float
        Length of one block, s.
    band_hz : (float, float) or None
        Frequency band of the level, Hz (None: the whole band, DC removed).
    unit : str or None
        Unit of the level when it is not the channel's (e.g. ``"mm/s"`` when integrated).
    """

    rpm: np.ndarray
    rms: np.ndarray
    n_blocks: np.ndarray
    block_s: float
    band_hz: tuple | None = None
    unit: str | None = None

    def to_frame(self):
        """The table ``overall_level.csv`` holds: columns ``rpm, rms, blocks`` (pandas)."""
        import pandas as pd

        return pd.DataFrame({"rpm": self.rpm, "rms": self.rms, "blocks": self.n_blocks})

    def maximum(self) -> tuple[float, float]:
        """The highest level and the speed of its row: ``(rms, rpm)``; ``(nan, nan)`` when no
        row holds a level."""
        rms = np.asarray(self.rms, dtype=float)
        if not np.isfinite(rms).any():
            return math.nan, math.nan
        i = int(np.nanargmax(rms))
        return float(rms[i]), float(self.rpm[i])

    def to_dict(self) -> dict:
        """``{"rpm": [...], "rms": [...]}`` (NaN as None) plus ``block_s`` and ``band_hz``."""
        def num(v):
            v = float(v)
            return v if math.isfinite(v) else None

        out = {"rpm": [num(v) for v in self.rpm], "rms": [num(v) for v in self.rms],
               "block_s": float(self.block_s)}
        if self.band_hz is not None:
            out["band_hz"] = [float(v) for v in self.band_hz]
        if self.unit is not None:
            out["unit"] = self.unit
        return out


def default_block_samples(rate_hz: float) -> int:
    """Samples per block of the overall level: a power of two near a quarter second (>= 256)."""
    return 1 << max(8, int(round(math.log2(max(float(rate_hz) * 0.25, 256.0)))))


def rpm_edges_from_centres(rpm) -> np.ndarray:
    """Bin edges whose bins are centred on the given speeds (the rows of a map), rpm.

    Parameters
    ----------
    rpm : array_like, shape (n,)
        Row speeds (any order; NaN ignored).

    Returns
    -------
    ndarray, shape (m + 1,)
        Edges of the ``m`` distinct rows sorted by speed: midpoints between neighbours, the
        outer edges half a step beyond the first and last row.
    """
    r = np.unique(np.asarray(rpm, dtype=float)[np.isfinite(np.asarray(rpm, dtype=float))])
    if r.size == 0:
        raise InputError("rpm: no finite speed to make bins from")
    if r.size == 1:
        return np.array([r[0] * (1 - 1e-6) - 1e-9, r[0] * (1 + 1e-6) + 1e-9])
    mid = 0.5 * (r[1:] + r[:-1])
    return np.concatenate([[r[0] - (mid[0] - r[0])], mid, [r[-1] + (r[-1] - mid[-1])]])


def overall_level(x, rate_hz: float, angle: ShaftAngle, *, rpm_edges=None, rpm_rows=None, band_hz=None,
                  block_samples: int | None = None, weight=None, unit: str | None = None) -> OverallLevel:
    """Overall RMS of a channel per time block, averaged into rpm bins.

    Parameters
    ----------
    x : array_like, shape (n,); or iterable of 1-D chunks; or callable returning one
        The channel, sampled from time 0, in its physical unit.
    rate_hz : float
        Sample rate, Hz.
    angle : ShaftAngle
        The speed at each block's centre; blocks centred outside its span are dropped.
    rpm_edges : array_like, shape (m + 1,), optional
        Bin edges, rpm (e.g. :func:`rpm_edges_from_centres` of an order map's rows); default
        one row per block.
    rpm_rows : array_like, optional
        Row speeds of a map, rpm (instead of ``rpm_edges``): the bins are centred on them
        (:func:`rpm_edges_from_centres`) and the result's ``rpm`` are these speeds, sorted.
    band_hz : (float, float), optional
        Only the content between these frequencies, Hz (0 <= lo < hi <= rate / 2).
    block_samples : int, optional
        Samples per block (default :func:`default_block_samples`: about 0.25 s).
    weight : callable, optional
        Amplitude weight of each frequency, ``weight(f_hz) -> array`` (e.g. the integration to
        velocity, :func:`~workbench.angle.scaling.integration_weight`); the level is then
        computed from the weighted spectrum of each block (the banded method below, over the
        whole band when ``band_hz`` is not given).
    unit : str, optional
        Unit of the level (recorded in the result; default the channel's, unnamed).

    Returns
    -------
    OverallLevel

    Notes
    -----
    Whole band: ``rms^2 = mean((x - mean(x))^2)`` over each block.  In a band: the block is
    Hann-windowed and ``rms^2 = 2 sum_k |X_k|^2 / (N S2)`` over the bins inside the band
    (``S2 = sum w^2``), which is the windowed block's mean square (Parseval's theorem; Heinzel,
    Ruediger & Schilling 2002, eq. 21) restricted to the band.  A sinusoid of peak amplitude A
    gives ``A / sqrt(2)`` either way.

    References
    ----------
    .. [1] G. Heinzel, A. Ruediger and R. Schilling, "Spectrum and spectral density estimation
       by the Discrete Fourier transform (DFT), including a comprehensive list of window
       functions and some new flat-top windows", Max-Planck-Institut fuer
       Gravitationsphysik (AEI), 2002.
    """
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    if not isinstance(angle, ShaftAngle):
        raise InputError(f"angle = {show(angle)}: must be a ShaftAngle")
    n = default_block_samples(rate) if block_samples is None else checks.positive_int(
        None, "block_samples", block_samples, low=8, whole_float=False)
    spectral = band_hz is not None or weight is not None
    if spectral:
        if band_hz is not None:
            lo, hi = (checks.real(None, "band_hz", v) for v in band_hz)
            if not 0 <= lo < hi <= rate / 2:
                raise InputError(f"band_hz = [{lo:g}, {hi:g}]: must be 0 <= lo < hi <= "
                                 f"Nyquist ({rate / 2:g} Hz)")
            band_hz = (lo, hi)
        else:
            lo, hi = 0.0, rate / 2
        w = np.hanning(n + 1)[:-1]  # periodic Hann
        f = np.fft.rfftfreq(n, 1.0 / rate)
        inband = (f >= lo) & (f <= hi) & (f > 0) & (f < rate / 2)
        scale = 2.0 / (n * float(np.sum(w * w)))
        if weight is not None:
            gain = np.nan_to_num(np.asarray(weight(f[inband]), dtype=float), nan=0.0) ** 2
            scale = scale * gain
    ms, centres = [], []
    buf = np.empty(0)
    start = 0  # sample index of buf[0]
    for chunk in iter_chunks(x, "x"):
        buf = np.concatenate([buf, np.asarray(chunk, dtype=float)])
        m = buf.size // n
        if m == 0:
            continue
        frames = buf[: m * n].reshape(m, n)
        if not spectral:
            ms.append(np.var(frames, axis=1))
        else:
            spec = np.fft.rfft((frames - frames.mean(axis=1, keepdims=True)) * w, axis=1)
            ms.append(np.sum(scale * np.abs(spec[:, inband]) ** 2, axis=1))
        centres.append(start + n * np.arange(m) + 0.5 * n)
        start += m * n
        buf = buf[m * n:]
    if not ms:
        raise InputError(f"the record is shorter than one block of {n} samples")
    ms = np.concatenate(ms)
    rpm = np.asarray(angle.rpm_at(np.concatenate(centres) / rate), dtype=float)
    ok = np.isfinite(rpm)
    if not ok.any():
        raise InputError(f"no block centre lies inside the shaft angle's span "
                         f"({angle.t_start_s:g} to {angle.t_end_s:g} s)")
    ms, rpm = ms[ok], rpm[ok]
    rows = None
    if rpm_rows is not None:
        if rpm_edges is not None:
            raise InputError("give rpm_edges or rpm_rows, not both")
        rpm_edges = rpm_edges_from_centres(rpm_rows)
        rows = 0.5 * (rpm_edges[1:] + rpm_edges[:-1])
        r = np.asarray(rpm_rows, dtype=float)
        rows = np.unique(r[np.isfinite(r)])
    if rpm_edges is None:
        return OverallLevel(rpm, np.sqrt(ms), np.ones(rpm.size, dtype=np.int64), n / rate, band_hz, unit)
    edges = np.asarray(rpm_edges, dtype=float)
    if edges.ndim != 1 or edges.size < 2 or np.any(np.diff(edges) <= 0):
        raise InputError("rpm_edges: give at least two increasing speeds (rpm)")
    k = np.searchsorted(edges, rpm, side="right") - 1
    inside = (k >= 0) & (k < edges.size - 1)
    counts = np.bincount(k[inside], minlength=edges.size - 1)
    sums = np.bincount(k[inside], weights=ms[inside], minlength=edges.size - 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        rms = np.where(counts > 0, np.sqrt(sums / np.maximum(counts, 1)), np.nan)
    centre = 0.5 * (edges[1:] + edges[:-1]) if rows is None else rows
    return OverallLevel(centre, rms, counts.astype(np.int64), n / rate, band_hz, unit)
