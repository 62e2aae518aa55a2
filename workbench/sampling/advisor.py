"""Advisor: which sample rate to use, and which angle-domain settings.

For each candidate rate of the plan the advisor builds the fold map, finds collisions and
reports whether the rate is clean; it recommends the lowest clean rate that also keeps the
highest order of interest inside the anti-alias filter's usable band at top speed.  It then
derives the angle-domain settings: samples per rev (a power of two, at least 2.56 x the
highest order, common practice for FFT analysers), revs per block (1 / order resolution), the
lowest rate that still captures the highest order at top speed, and the smearing a plain
time-domain FFT would suffer at the plan's sweep rate.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.checks import positive
from workbench.errors import FoldlineWarning, InputError
from workbench.sampling.foldmap import MONOTONE_FILTERS, find_collisions, fold_map

__all__ = ["AngleSettings", "Advice", "advise", "angle_settings", "STANDARD_RATES_HZ",
           "ANALYSER_FACTOR"]

#: Sample rates commonly offered by acquisition front ends, Hz (common practice, no source):
#: the 2.56 x binary-span series and the audio-derived series.
STANDARD_RATES_HZ = (
    2560.0, 5120.0, 6400.0, 10240.0, 12800.0, 20480.0, 25600.0, 32768.0, 40960.0,
    44100.0, 48000.0, 51200.0, 65536.0, 96000.0, 102400.0, 131072.0, 192000.0, 204800.0,
)

#: Analyser bandwidth factor: rate = 2.56 x the highest frequency of interest (common practice).
ANALYSER_FACTOR = 2.56


@dataclass(frozen=True)
class AngleSettings:
    """Angle-domain (order tracking) settings derived from a plan.

    Attributes
    ----------
    samples_per_rev : int
        Angle-domain samples per revolution of the reference shaft (power of two).
    max_order : float
        Highest order of interest.
    order_resolution : float
        Order spacing of the order spectrum, orders.
    min_rate_hz : float
        Lowest sample rate at which ``max_order`` at top speed still lies in the filter's
        usable band, Hz.
    top_speed_rpm : float
        Highest reference speed of the profile, rpm.
    smearing_bins : float
        Bins that ``max_order`` moves during one time-domain FFT block at the plan's fastest
        sweep, for the block length that gives ``order_resolution`` at the lowest speed.
    smearing_hz : float
        The same movement in Hz.
    """

    samples_per_rev: int
    max_order: float
    order_resolution: float
    min_rate_hz: float
    top_speed_rpm: float
    smearing_bins: float
    smearing_hz: float

    @property
    def revs_per_block(self) -> int:
        """Revolutions per FFT block: 1 / order resolution, rounded up."""
        return int(math.ceil(1.0 / self.order_resolution - 1e-9))

    @property
    def order_nyquist(self) -> float:
        """Angle-domain Nyquist order, samples_per_rev / 2."""
        return self.samples_per_rev / 2.0

    @property
    def usable_max_order(self) -> float:
        """Highest order the angle domain shows free of its own filter: samples_per_rev / 2.56."""
        return self.samples_per_rev / ANALYSER_FACTOR

    def to_dict(self) -> dict:
        """The JSON contract's ``resampling`` object (plus the smearing figures)."""
        return {
            "samples_per_rev": int(self.samples_per_rev),
            "max_order": float(self.max_order),
            "order_resolution": float(self.order_resolution),
            "revs_per_block": int(self.revs_per_block),
            "min_rate_hz": float(self.min_rate_hz),
            "smearing_bins": float(self.smearing_bins),
            "smearing_hz": float(self.smearing_hz),
        }


@dataclass(frozen=True)
class Advice:
    """The advisor's verdict on a plan.

    Attributes
    ----------
    candidates : pandas.DataFrame
        One row per candidate rate: ``rate_hz``, ``clean``, ``collisions``,
        ``worst_residual_db`` (highest residual of a folded line inside any band, whether or
        not above the threshold; NaN when no folded line enters a band), ``captures_max_order``.
    recommended_rate_hz : float or None
        Lowest clean candidate that captures the highest order; None when none qualifies.
    resampling : AngleSettings
    notes : tuple of str
        Plain-language remarks (why a rate was chosen or rejected).
    collisions : dict
        Collision table of each candidate rate (rate -> DataFrame).
    crossings : pandas.DataFrame or None
        Crossings of the machine's lines with its resonances and criticals inside the speed
        profile (:func:`workbench.sampling.resonance.find_crossings`); None when the
        machine has neither (or only lines were given).
    """

    candidates: pd.DataFrame
    recommended_rate_hz: float | None
    resampling: AngleSettings
    notes: tuple
    collisions: dict
    crossings: pd.DataFrame | None = None

    def to_dict(self) -> dict:
        """The JSON contract of ``foldline plan``."""
        cands = []
        for row in self.candidates.itertuples(index=False):
            worst = None if not np.isfinite(row.worst_residual_db) else float(row.worst_residual_db)
            cands.append(
                {
                    "rate_hz": float(row.rate_hz),
                    "clean": bool(row.clean),
                    "collisions": int(row.collisions),
                    "worst_residual_db": worst,
                    "captures_max_order": bool(row.captures_max_order),
                }
            )
        out = {
            "candidates": cands,
            "recommended_rate_hz": self.recommended_rate_hz,
            "resampling": self.resampling.to_dict(),
            "notes": list(self.notes),
            "crossings": [],
        }
        if self.crossings is not None:
            from workbench.sampling.resonance import Crossing

            out["crossings"] = [Crossing(**row).to_dict()
                                for row in self.crossings.to_dict("records")]
        return out


def _next_pow2(x: float) -> int:
    return 1 << max(0, int(math.ceil(math.log2(max(x, 1.0)) - 1e-12)))


def _default_max_order(lines) -> float:
    orders = [ln.order for ln in lines if ln.order is not None]
    return float(max(orders)) if orders else 1.0


def _default_resolution(lines, max_order) -> float:
    """Half the smallest spacing between distinct line orders up to ``max_order``, <= 0.25."""
    orders = np.unique(np.round([ln.order for ln in lines if ln.order is not None and ln.order <= max_order], 9))
    if len(orders) < 2:
        return 0.25
    gap = float(np.min(np.diff(orders)))
    return float(min(0.25, max(gap / 2.0, 1e-3)))


def min_rate_for(filt, top_hz: float) -> float:
    """Lowest rate whose filter usable edge reaches ``top_hz`` (bisection on rate).

    Parameters
    ----------
    filt : AntiAliasFilter
    top_hz : float
        Highest frequency that must lie in the usable band, Hz.
    """
    if top_hz <= 0:
        return 0.0
    if filt.kind != "table" or getattr(filt, "table_units", "hz") == "fraction":
        # Every model but a table in Hz scales with the rate: the usable edge is a fixed
        # fraction of it.
        fraction = filt.usable_edge_hz(1.0)
        if fraction <= 0:
            raise InputError(f"the {filt.kind} filter has no usable band at any rate")
        return top_hz / fraction
    lo, hi = 2.0 * top_hz, 2.0 * top_hz
    for _ in range(64):
        if filt.usable_edge_hz(hi) >= top_hz:
            break
        lo, hi = hi, hi * 2.0
    else:
        raise InputError(f"the {filt.kind} filter's usable band never reaches {top_hz:.6g} Hz at any rate")
    if filt.usable_edge_hz(lo) >= top_hz:
        return lo
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if filt.usable_edge_hz(mid) >= top_hz:
            hi = mid
        else:
            lo = mid
    return hi


def angle_settings(lines, plan, *, max_order=None, order_resolution=None) -> AngleSettings:
    """Angle-domain settings for the plan's highest order of interest and order resolution.

    Parameters
    ----------
    lines : sequence of Line or Machine
    plan : Plan
    max_order, order_resolution : float, optional
        Override the plan's ``[resampling]`` values.  When neither the plan nor the caller
        gives them, ``max_order`` is the highest line order of the machine and the resolution
        half the smallest spacing between distinct line orders (capped at 0.25).

    Returns
    -------
    AngleSettings

    References
    ----------
    .. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking", Mechanical
       Systems and Signal Processing 11(2):187-205, 1997 (angle-domain Nyquist order
       samples_per_rev / 2, order resolution 1 / revs per block).
    """
    if hasattr(lines, "lines") and callable(lines.lines):
        lines = lines.lines()
    lines = tuple(lines)
    mo = max_order if max_order is not None else plan.max_order
    mo = positive(None, "max_order", mo if mo is not None else _default_max_order(lines),
                  unit="orders")
    res = order_resolution if order_resolution is not None else plan.order_resolution
    res = positive(None, "order_resolution",
                   res if res is not None else _default_resolution(lines, mo), unit="orders")
    spr = _next_pow2(ANALYSER_FACTOR * mo)
    top_rpm = float(plan.speed.rpm_max)
    min_rate = min_rate_for(plan.filter, mo * top_rpm / 60.0)
    # Smearing of a plain time-domain FFT (no angle resampling): a block long enough for the
    # order resolution at the lowest speed lasts T = 1 / (res * f_rot_min); during it order k
    # moves k * (d f_rot / dt) * T Hz = k * (d f_rot / dt) * T^2 bins (REFERENCES.md).
    f_min = max(float(plan.speed.rpm_min), 1e-9) / 60.0
    block_s = 1.0 / (res * f_min)
    sweep_hz_per_s = float(plan.speed.max_sweep_rate_rpm_per_s) / 60.0
    smear_hz = mo * sweep_hz_per_s * block_s
    return AngleSettings(
        samples_per_rev=spr,
        max_order=mo,
        order_resolution=res,
        min_rate_hz=float(min_rate),
        top_speed_rpm=top_rpm,
        smearing_bins=float(smear_hz * block_s),
        smearing_hz=float(smear_hz),
    )


def advise(machine, plan, *, rates_hz=None, n_speeds=1000) -> Advice:
    """Judge each candidate rate and recommend one.

    Parameters
    ----------
    machine : Machine or sequence of Line
    plan : Plan
    rates_hz : sequence of float, optional
        Candidate rates (default: the plan's ``rates_hz``).
    n_speeds : int, optional
        Speed grid size of each fold map where the filter needs the grid method (Chebyshev,
        elliptic, table; default 1000; edges are refined beyond the grid, so the grid only sets
        the narrowest interval that cannot be missed).  Other filters are judged in closed form.

    Returns
    -------
    Advice
        ``recommended_rate_hz`` is the lowest candidate that is clean (no collision) and keeps
        the highest order of interest inside the filter's usable band at top speed.  When no
        candidate qualifies, the standard rates (:data:`STANDARD_RATES_HZ`) are searched and
        the first that qualifies is recommended with a note saying it was not a candidate.
    """
    lines = machine.lines() if hasattr(machine, "lines") and callable(machine.lines) else tuple(machine)
    if hasattr(plan, "check_against"):
        plan.check_against(lines)
    rates = tuple(plan.rates_hz if rates_hz is None else rates_hz)
    if not rates:
        raise InputError("no candidate rates: give [acquisition] rates_hz in the plan")
    settings = angle_settings(lines, plan)
    top_hz = settings.max_order * settings.top_speed_rpm / 60.0
    rows, tables, notes = [], {}, []

    exact = plan.filter.kind in MONOTONE_FILTERS
    grid = None
    if not exact:
        with warnings.catch_warnings():  # each candidate's rate is judged (and warned) below
            warnings.simplefilter("ignore", FoldlineWarning)
            grid = fold_map(lines, plan, float(rates[0]), n_speeds=n_speeds)

    def judge(rate):
        if exact:
            # Closed form, no speed grid (see find_collisions): the threshold table, and the
            # same intervals without a threshold for the worst folded residual.
            table = find_collisions(lines, plan, rate, method="auto")
            loose = find_collisions(lines, plan, rate, method="auto", threshold_db=-np.inf)
            folded = loose["residual_db"][loose["kind"] == "collision"]
            worst = float(folded.max()) if len(folded) else -np.inf
        else:
            # The true frequencies on the speed grid do not depend on the rate: computed once.
            fmap = fold_map(lines, plan, rate, rpm=grid.rpm, true_hz=grid.true_hz)
            table = find_collisions(lines, plan, rate, fmap=fmap, method="grid")
            worst = _worst_folded_residual(lines, plan, fmap)
        coll = table[table["kind"] == "collision"]
        captures = plan.filter.usable_edge_hz(rate) >= top_hz
        return table, coll, worst, captures

    from workbench.sampling.guards import NO_FILTER_NOTE, warn_implausible_rate

    if plan.filter.kind == "none":
        notes.append(NO_FILTER_NOTE)
    for rate in sorted(float(r) for r in rates):
        warn_implausible_rate(rate, lines=lines, top_rpm=settings.top_speed_rpm,
                              name="candidate rate")
        table, coll, worst, captures = judge(rate)
        tables[rate] = table
        rows.append(
            {
                "rate_hz": rate,
                "clean": len(coll) == 0,
                "collisions": int(len(coll)),
                "worst_residual_db": worst,
                "captures_max_order": bool(captures),
            }
        )
        if not captures:
            notes.append(
                f"{rate:g} Hz: order {settings.max_order:g} at {settings.top_speed_rpm:g} rpm "
                f"({top_hz:.1f} Hz) lies beyond the filter's usable band "
                f"({plan.filter.usable_edge_hz(rate):.1f} Hz)"
            )
        if len(coll):
            first = coll.iloc[0]
            notes.append(
                f"{rate:g} Hz: {len(coll)} collision(s); worst: {first['line']} folds into "
                f"{first['band']} at {first['rpm_min']:.0f}-{first['rpm_max']:.0f} rpm, "
                f"residual {first['residual_db']:.1f} dB"
            )
    cand = pd.DataFrame(rows, columns=["rate_hz", "clean", "collisions", "worst_residual_db", "captures_max_order"])
    ok = cand[cand["clean"] & cand["captures_max_order"]]
    recommended = float(ok["rate_hz"].iloc[0]) if len(ok) else None
    if recommended is not None:
        notes.append(f"recommended {recommended:g} Hz: the lowest candidate with no collision that captures order {settings.max_order:g} at top speed")
    else:
        for rate in STANDARD_RATES_HZ:
            if rate < settings.min_rate_hz:
                continue
            table, coll, worst, captures = judge(rate)
            if len(coll) == 0 and captures:
                recommended = rate
                tables[rate] = table
                notes.append(f"no candidate rate is both clean and captures order {settings.max_order:g}; "
                             f"{rate:g} Hz (a standard rate, not among the candidates) is")
                warnings.warn(
                    f"no candidate rate is both clean and captures order {settings.max_order:g}; "
                    f"recommending {rate:g} Hz, which is not a plan candidate",
                    FoldlineWarning,
                    stacklevel=2,
                )
                break
        else:
            notes.append("no candidate or standard rate is both clean (no collision) and captures "
                         f"order {settings.max_order:g}: change the filter, the bands or the threshold")
    crossings = _crossings(machine, lines, plan, notes)
    return Advice(
        candidates=cand,
        recommended_rate_hz=recommended,
        resampling=settings,
        notes=tuple(notes),
        collisions=tables,
        crossings=crossings,
    )


def _crossings(machine, lines, plan, notes: list):
    """Crossings of lines with the machine's resonances and criticals; warn on fast sweeps."""
    resonances = tuple(getattr(machine, "resonances", ()))
    criticals = tuple(getattr(machine, "criticals", ()))
    if not (resonances or criticals):
        return None
    from workbench.sampling.resonance import PEAK_LOSS_LIMIT_DB, find_crossings

    table = find_crossings(lines, plan.speed, resonances=resonances, criticals=criticals)
    notes.append(f"{len(table)} crossing(s) of machine lines with {len(resonances)} "
                 f"resonance(s) and {len(criticals)} critical(s) inside the speed profile")
    fast = table[~table["sweep_ok"]]
    if len(fast):
        worst = fast.sort_values("peak_loss_db", ascending=False).iloc[0]
        text = (f"{len(fast)} crossing(s) are swept too fast for the resonance peak to build "
                f"up within {PEAK_LOSS_LIMIT_DB:g} dB (passage through resonance, Lewis 1932); "
                f"worst: '{worst['line']}' through '{worst['resonance']}' at "
                f"{worst['rpm']:.0f} rpm loses {worst['peak_loss_db']:.1f} dB at "
                f"{worst['sweep_rpm_per_s']:.3g} rpm/s; sweep at most "
                f"{worst['slowest_sweep_rpm_per_s']:.3g} rpm/s there (or dwell), within the "
                "machine maker's limits")
        notes.append(text)
        warnings.warn(text, FoldlineWarning, stacklevel=3)
    return table


def _worst_folded_residual(lines, plan, fmap) -> float:
    """Highest residual of any folded line inside any band (threshold ignored), dB; -inf if none."""
    worst = -np.inf
    folded = fmap.zone >= 1
    if not folded.any():
        return worst
    res = fmap.residual_db
    app = fmap.apparent_hz
    for band in plan.bands:
        lo, hi = band.limits_hz(fmap.rpm, lines)
        inside = folded & (app >= np.asarray(lo)[None, :] if np.ndim(lo) else app >= lo)
        inside &= app <= (np.asarray(hi)[None, :] if np.ndim(hi) else hi)
        own = getattr(band, "around", None)
        if own is not None:
            for i, ln in enumerate(lines):
                if ln.name == own:
                    inside[i] = False
        if inside.any():
            worst = max(worst, float(np.max(res[inside])))
    return worst
