"""Acceptance limits of a plan judged on a tracked run: the worst level, where, pass or fail.

A plan's ``[[limit]]`` entries (:class:`~workbench.sampling.Limit`) say how high a band or an
order may get during the run.  This module measures each one on a
:class:`~workbench.runs.analysis.RunAnalysis`:

* a **band** limit reads the band's level in every block of the order map, with the one
  definition the batch summary uses (:func:`workbench.runs.levels.band_level_series`:
  ``sqrt(sum A_k^2 / ENBW)`` over the bins inside the band at the block's speed);
* an **order** limit reads the order cut over the limit's bandwidth
  (:func:`workbench.angle.order_cut`, the same energy sum over ``order +- bandwidth / 2``).

Both are window-corrected peak amplitudes in the channel's unit: a sinusoid of peak amplitude
A reads A.  For a limit given as RMS the level is divided by sqrt(2) (the RMS of a sinusoid)
before it is compared.  Only blocks whose speed lies inside the limit's ``rpm`` range count;
the highest of them is the **worst** level and its speed is ``rpm_at_worst``.  The limit
passes when ``worst <= max``.  When no block of the run lies inside the range (or the order
lies beyond the map) the limit cannot be judged: ``passed`` is None and ``note`` says why.

Limits come from the user, the machine maker or the standard that applies; foldline compares,
it does not set acceptance criteria (:data:`LIMITS_NOTE`, printed beside every verdict).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from workbench.angle import order_cut
from workbench.errors import InputError
from workbench.runs.levels import band_level_series

__all__ = ["LimitResult", "evaluate_limits", "limits_verdict", "LIMITS_NOTE"]

#: Said beside every verdict (report, command): who sets the limits, what foldline does.
LIMITS_NOTE = ("The limits come from the user, the machine maker or the standard that applies; "
               "foldline compares the measured levels with them, it does not set acceptance "
               "criteria.")


@dataclass(frozen=True, eq=False)
class LimitResult:
    """One limit judged on one run (and channel).

    Attributes
    ----------
    limit : Limit
        The plan's limit.
    channel, unit : str
        The vibration channel judged and its unit (the unit of ``max`` and ``worst``).
    worst : float
        Highest level inside the limit's speed range, in the limit's measure (peak, or RMS
        for ``amplitude = "rms"``); NaN when the limit could not be judged.
    rpm_at_worst : float
        Speed of the block where the worst level occurred, rpm (NaN when not judged).
    passed : bool or None
        ``worst <= max``; None when the limit could not be judged (see ``note``).
    rpm, level : ndarray
        The speed (rpm) and level (limit's measure) of every block of the run, for drawing;
        NaN where the block has no level.
    note : str
        Why the limit was not judged, or ``""``.
    """

    limit: object
    channel: str
    unit: str
    worst: float
    rpm_at_worst: float
    passed: bool | None
    rpm: np.ndarray = field(repr=False)
    level: np.ndarray = field(repr=False)
    note: str = ""

    @property
    def name(self) -> str:
        return self.limit.name

    @property
    def max(self) -> float:
        return float(self.limit.max)

    def in_range(self) -> np.ndarray:
        """Boolean mask of the blocks inside the limit's speed range."""
        return _in_range(self.rpm, self.limit.rpm)

    def to_dict(self) -> dict:
        """``{"name", "max", "worst", "rpm_at_worst", "pass"}`` (the command's JSON contract)
        plus ``channel``, ``unit``, ``amplitude`` (peak or rms) and ``note``."""
        return {
            "name": self.name,
            "max": self.max,
            "worst": None if not math.isfinite(self.worst) else float(self.worst),
            "rpm_at_worst": None if not math.isfinite(self.rpm_at_worst) else float(self.rpm_at_worst),
            "pass": self.passed,
            "channel": self.channel,
            "unit": self.unit,
            "amplitude": self.limit.amplitude,
            "note": self.note,
        }

    def describe(self) -> str:
        """One line for a terminal or a report: name, verdict, worst level and where."""
        unit = f" {self.unit}" if self.unit else ""
        if self.passed is None:
            return f"{self.name}: not judged ({self.note})"
        word = "passed" if self.passed else "FAILED"
        return (f"{self.name}: {word}: worst {self.worst:.4g}{unit} {self.limit.amplitude} at "
                f"{self.rpm_at_worst:.0f} rpm against max {self.max:g}{unit}")


def _in_range(rpm, bounds) -> np.ndarray:
    rpm = np.asarray(rpm, dtype=float)
    ok = np.isfinite(rpm)
    if bounds is None:
        return ok
    lo, hi = bounds
    return ok & (rpm >= lo) & (rpm <= hi)


def _series(analysis, limit, bands, lines) -> tuple[np.ndarray, str]:
    """Peak level of every map block for one limit, and a note when it cannot be read."""
    omap = analysis.order_map
    if limit.band is not None:
        band = next((b for b in bands if b.name == limit.band), None)
        if band is None:
            raise InputError(f"limit {limit.name!r}: band: no band named {limit.band!r} was "
                             "given with the limits (the plan's [[band]] entries)")
        if band.kind == "around" and not any(getattr(ln, "name", None) == band.around for ln in lines):
            return np.full(np.shape(omap.rpm), np.nan), (
                f"band {band.name!r} follows the line {band.around!r}: give the machine file")
        return band_level_series(omap, band, lines), ""
    top = float(np.asarray(omap.order)[-1])
    if limit.order + 0.5 * limit.bandwidth > top:
        return np.full(np.shape(omap.rpm), np.nan), (
            f"order {limit.order:g} +- {limit.bandwidth / 2:g} lies above the highest order "
            f"tracked ({top:g}); raise --samples-per-rev or --max-order")
    res = float(omap.order_resolution)
    bandwidth = max(float(limit.bandwidth), res)
    cut = order_cut(omap, limit.order, bandwidth_orders=bandwidth)
    note = "" if bandwidth == limit.bandwidth else (
        f"bandwidth widened to one bin ({res:g} orders)")
    return np.asarray(cut.amplitude, dtype=float), note


def evaluate_limits(analysis, limits, *, bands=(), lines=None) -> tuple:
    """Judge each acceptance limit on a tracked run.

    Parameters
    ----------
    analysis : RunAnalysis
        The run tracked by :func:`~workbench.runs.analysis.track_run` (its order map, channel
        and unit are used).
    limits : sequence of Limit
        The plan's limits (``plan.limits``).
    bands : sequence of Band
        The plan's bands (``plan.bands``), which band limits name.
    lines : sequence of Line, optional
        The machine's lines, for bands that follow a line; default the lines the analysis
        was identified with (``analysis.lines``).

    Returns
    -------
    tuple of LimitResult
        One per limit, in the plan's order.

    Notes
    -----
    A band level and an order cut are energy sums over the window's main lobe corrected by
    the Hann window's equivalent noise bandwidth (1.5 bins) [1]_, so a single line of peak
    amplitude A inside the band reads A.  An RMS limit compares ``level / sqrt(2)``.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proceedings of the IEEE 66(1):51-83, 1978.
    """
    lines = tuple(getattr(analysis, "lines", ()) or ()) if lines is None else tuple(lines)
    rpm = np.asarray(analysis.order_map.rpm, dtype=float)
    out = []
    for lim in limits:
        peak, note = _series(analysis, lim, tuple(bands), lines)
        level = peak / math.sqrt(2.0) if lim.amplitude == "rms" else peak
        inside = _in_range(rpm, lim.rpm) & np.isfinite(level)
        if note and not np.isfinite(level).any():
            worst, at, passed = math.nan, math.nan, None
        elif not inside.any():
            worst, at, passed = math.nan, math.nan, None
            span = f"{np.nanmin(rpm):.0f} to {np.nanmax(rpm):.0f} rpm" if np.isfinite(rpm).any() else "no speed"
            note = (f"the run ({span}) never reached the limit's range "
                    f"{lim.rpm[0]:g} to {lim.rpm[1]:g} rpm" if lim.rpm is not None
                    else "no block of the run has a level")
        else:
            k = int(np.argmax(np.where(inside, level, -np.inf)))
            worst, at = float(level[k]), float(rpm[k])
            passed = bool(worst <= lim.max)
        out.append(LimitResult(limit=lim, channel=str(analysis.channel), unit=str(analysis.unit or ""),
                               worst=worst, rpm_at_worst=at, passed=passed, rpm=rpm, level=level,
                               note=note))
    return tuple(out)


def limits_verdict(results) -> str:
    """One sentence: all limits passed, or which failed and where (and which were not judged).

    Parameters
    ----------
    results : sequence of LimitResult

    Returns
    -------
    str
        ``""`` when there are no limits.
    """
    results = tuple(results)
    if not results:
        return ""
    failed = [r for r in results if r.passed is False]
    unjudged = [r for r in results if r.passed is None]
    if failed:
        unit = lambda r: f" {r.unit}" if r.unit else ""  # noqa: E731
        text = (f"FAILED: {len(failed)} of {len(results)} limit(s) exceeded: " + "; ".join(
            f"{r.name} reached {r.worst:.4g}{unit(r)} {r.limit.amplitude} at {r.rpm_at_worst:.0f} "
            f"rpm (max {r.max:g})" for r in failed) + ".")
    elif unjudged:
        text = f"Not all limits could be judged: {len(results) - len(unjudged)} of {len(results)} passed."
    else:
        text = f"PASSED: all {len(results)} limit(s) passed."
    if unjudged:
        text += " Not judged: " + "; ".join(f"{r.name} ({r.note})" for r in unjudged) + "."
    return text
