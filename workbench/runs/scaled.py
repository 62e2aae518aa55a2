"""A tracked run shown in another amplitude scaling: RMS, dB, velocity or displacement.

:func:`scaled_analysis` converts every amplitude a :class:`~workbench.runs.analysis.RunAnalysis`
shows (order spectrum and its peaks, order map, order cuts, frequency map, identified and
unmatched lines) with one :class:`~workbench.angle.scaling.AmplitudeScaling`, so figures,
tables and JSON agree.  Integration is done on the order map, bin by bin at each row's speed
(the run-averaged spectrum cannot be integrated afterwards: its blocks ran at different
speeds), and the spectrum, its peaks and the cuts are remade from the integrated map.  The
overall level stays the channel's time-domain RMS (its unit in its label).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from workbench.angle import find_order_peaks, order_cut
from workbench.angle.scaling import (AmplitudeScaling, acceleration_factor, integrate_frequency_map,
                                     integrate_order_map, spectrum_from_map)

__all__ = ["scaled_analysis", "rolloff_corrected"]


def _point_factor(scaling, unit, rpm, order):
    """Integration factor of ridge points (rpm, order): 1 / (2 pi f)^p in the shown unit."""
    if not scaling.integrate:
        return np.ones(len(rpm))
    from workbench.angle.scaling import _OUT_UNITS

    p = 1 if scaling.integrate == "velocity" else 2
    hz = np.asarray(order, dtype=float) * np.asarray(rpm, dtype=float) / 60.0
    k = acceleration_factor(unit) * _OUT_UNITS[scaling.integrate][1]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(hz >= scaling.min_hz, k / (2 * np.pi * hz) ** p, np.nan)


def scaled_analysis(analysis, scaling: AmplitudeScaling):
    """The same run with every shown amplitude converted by ``scaling``.

    Parameters
    ----------
    analysis : RunAnalysis
        Peak amplitudes in the channel's unit (as :func:`track_run` returns them).
    scaling : AmplitudeScaling

    Returns
    -------
    RunAnalysis
        ``unit`` becomes the shown unit (``mm/s``, ``um``, or ``dB re REF UNIT``); ``scaling``
        is set (``to_dict`` then carries ``"scaling"``).
    """
    if scaling is None or scaling.is_identity:
        return analysis
    a = analysis
    unit = a.unit
    omap, spec, cuts, rfm = a.order_map, a.spectrum, a.cuts, a.rf_map
    peaks = a.peaks
    if scaling.integrate:
        omap = integrate_order_map(omap, to=scaling.integrate, unit=unit, min_hz=scaling.min_hz)
        spec = spectrum_from_map(omap, spec)
        cuts = tuple(order_cut(omap, c.order, bandwidth_orders=c.bandwidth_orders) for c in cuts)
        if rfm is not None:
            rfm = integrate_frequency_map(rfm, to=scaling.integrate, unit=unit, min_hz=scaling.min_hz)
        clean = replace(spec, amplitude=np.nan_to_num(spec.amplitude, nan=0.0))
        found = find_order_peaks(clean, n=10)
        peaks = pd.DataFrame({"order": np.asarray(found.order), "amplitude": np.asarray(found.amplitude),
                              "prominence_db": np.asarray(found.prominence_db)})
    lvl = scaling.level
    spec = replace(spec, amplitude=lvl(spec.amplitude))
    omap = replace(omap, amplitude=lvl(omap.amplitude))
    cuts = tuple(replace(c, amplitude=lvl(c.amplitude)) for c in cuts)
    if rfm is not None:
        rfm = replace(rfm, amplitude=lvl(rfm.amplitude))
    peaks = peaks.assign(amplitude=lvl(peaks["amplitude"].to_numpy()))
    env_peaks = a.envelope_peaks
    ident = a.identification
    if ident is not None:
        pts = ident.points.copy()
        pts["amplitude"] = lvl(pts["amplitude"].to_numpy() * _point_factor(scaling, unit, pts["rpm"], pts["order"]))
        table = ident.table.copy()
        if len(table):
            best = pts[pts["line"].notna()].groupby(["line", "zone"])["amplitude"].max()
            table["amplitude_max"] = [best.get((r.line, r.zone), np.nan) for r in table.itertuples()]
        ident = replace(ident, points=pts, table=table, unmatched=_scaled_unmatched(ident.unmatched, scaling, unit))
    unmatched = _scaled_unmatched(a.unmatched, scaling, unit)
    shown_unit = scaling.unit(unit)
    if scaling.db_ref is not None:
        shown_unit = f"dB re {scaling.db_ref:g} {shown_unit}".strip()
    return replace(a, spectrum=spec, order_map=omap, cuts=cuts, rf_map=rfm, peaks=peaks, envelope_peaks=env_peaks,
                   identification=ident, unmatched=unmatched, unit=shown_unit, scaling=scaling,
                   channel_unit=unit)


def _scaled_unmatched(table, scaling, unit):
    """Unmatched lines' largest amplitude, converted (integrated at the line's strongest speed
    is unknown, so at the middle of its speed range and its middle order)."""
    if table is None or not len(table):
        return table
    t = table.copy()
    rpm = 0.5 * (t["rpm_min"].to_numpy() + t["rpm_max"].to_numpy())
    order = np.where(np.isfinite(t["order"].to_numpy(dtype=float)), t["order"].to_numpy(dtype=float),
                     0.5 * (t["order_min"].to_numpy() + t["order_max"].to_numpy()))
    t["amplitude_max"] = scaling.level(t["amplitude_max"].to_numpy() * _point_factor(scaling, unit, rpm, order))
    return t


def rolloff_corrected(analysis, aa_filter):
    """The run with the anti-alias filter's roll-off taken out inside its usable band.

    The order map is corrected bin by bin (:func:`~workbench.angle.scaling.correct_rolloff_map`)
    and the spectrum, its peaks and the cuts are remade from it; call before
    :func:`scaled_analysis`.  The log says so.
    """
    from workbench.angle.scaling import correct_rolloff_map

    a = analysis
    omap = correct_rolloff_map(a.order_map, aa_filter, a.rate_hz)
    spec = spectrum_from_map(omap, a.spectrum)
    cuts = tuple(order_cut(omap, c.order, bandwidth_orders=c.bandwidth_orders) for c in a.cuts)
    found = find_order_peaks(replace(spec, amplitude=np.nan_to_num(spec.amplitude, nan=0.0)), n=10)
    peaks = pd.DataFrame({"order": np.asarray(found.order), "amplitude": np.asarray(found.amplitude),
                          "prominence_db": np.asarray(found.prominence_db)})
    note = (f"anti-alias filter roll-off corrected inside its usable band (up to "
            f"{min(float(aa_filter.usable_edge_hz(a.rate_hz)), a.rate_hz / 2):.0f} Hz)")
    return replace(a, order_map=omap, spectrum=spec, cuts=cuts, peaks=peaks, log=tuple(a.log) + (note,))
