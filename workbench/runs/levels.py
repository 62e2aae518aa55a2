"""Level of each protected band in a tracked run, from its order map.

Shared by the batch summary (one column per band) and the acceptance limits of a plan
(:mod:`workbench.runs.limits`), so both read the same number.

The batch summary gives one number per plan band and run: how strong the content inside the
band got during the run.  Definition (documented in the README and the batch summary):

    level = max over blocks b of  sqrt( sum_k A[b, k]^2 / ENBW )

where the sum runs over the order-map bins ``k`` whose order lies inside the band's limits at
block ``b``'s speed (a band fixed in Hz or around a line moves in orders as the speed changes),
``A`` is the window-corrected peak amplitude of the map and ``ENBW`` the window's equivalent
noise bandwidth in bins (1.5 for Hann).  It is the energy sum an order cut uses: a single
sinusoid of peak amplitude ``A`` inside the band gives ``A`` back wherever it falls between
bins, and several lines inside the band add on power.  The unit is the channel's unit, peak.
"""

from __future__ import annotations

import numpy as np

from workbench.checks import positive
from workbench.errors import InputError

__all__ = ["band_levels", "band_level_series"]


def band_level_series(order_map, band, lines=()) -> np.ndarray:
    """Level of one band in each block of an order map.

    Parameters
    ----------
    order_map : object with ``rpm`` (B,), ``order`` (K,), ``amplitude`` (B, K) and
        optionally ``enbw_bins`` (default 1.5, the Hann window's)
    band : Band
        A plan band (fixed in Hz, in orders, or around a line).
    lines : sequence of Line, optional
        The machine's lines (needed for bands around a line).

    Returns
    -------
    ndarray, shape (B,)
        ``sqrt(sum A^2 / ENBW)`` over the bins inside the band at each block's speed, in the
        map's amplitude unit; NaN for a block with no bin inside the band or no positive speed.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
       transform", Proceedings of the IEEE 66(1):51-83, 1978 (equivalent noise bandwidth).
    .. [2] G. Heinzel, A. Ruediger and R. Schilling, "Spectrum and spectral density estimation
       by the Discrete Fourier transform (DFT)", Max-Planck-Institut fuer
       Gravitationsphysik (AEI), 2002 (power in a band from an amplitude spectrum).
    """
    rpm = np.asarray(order_map.rpm, dtype=float)
    order = np.asarray(order_map.order, dtype=float)
    amp = np.asarray(order_map.amplitude, dtype=float)
    if amp.shape != (rpm.size, order.size):
        raise InputError(f"order map amplitude has shape {amp.shape}; expected (len(rpm), "
                         f"len(order)) = ({rpm.size}, {order.size})")
    enbw = positive("order map", "enbw_bins", getattr(order_map, "enbw_bins", 1.5), unit="bins")
    out = np.full(rpm.shape, np.nan)
    good = np.isfinite(rpm) & (rpm > 0)
    if not good.any():
        return out
    f_rot = rpm[good] / 60.0
    lo_hz, hi_hz = band.limits_hz(rpm[good], lines)
    lo = np.asarray(lo_hz, dtype=float) / f_rot
    hi = np.asarray(hi_hz, dtype=float) / f_rot
    inside = (order[None, :] >= lo[:, None]) & (order[None, :] <= hi[:, None])
    power = np.where(inside, np.square(amp[good]), 0.0)
    # A NaN bin (an empty rpm bin of a binned map) leaves the whole block undefined.
    power = np.where(inside & ~np.isfinite(amp[good]), np.nan, power)
    total = np.sum(power, axis=1)
    level = np.sqrt(total / enbw)
    level[~inside.any(axis=1)] = np.nan
    out[good] = level
    return out


def band_levels(order_map, bands, lines=()) -> dict:
    """Highest level of each band over a run (see the module's definition).

    Parameters
    ----------
    order_map : OrderMap-like
    bands : sequence of Band
    lines : sequence of Line, optional

    Returns
    -------
    dict
        Band name -> level (float; NaN when no block has a bin inside the band).
    """
    out = {}
    for band in bands:
        series = band_level_series(order_map, band, lines)
        out[band.name] = float(np.nanmax(series)) if np.isfinite(series).any() else float("nan")
    return out
