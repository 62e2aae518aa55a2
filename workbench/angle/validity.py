"""Where an order can be measured at all: the valid region of cuts, spectra and maps.

At a shaft speed of ``rpm``, order ``k`` lies at ``k rpm / 60`` Hz.  Above the anti-alias
filter's usable edge (where its attenuation first exceeds 1 dB) the order is measured low, by
the filter's roll-off; above the Nyquist frequency (rate / 2) it is not measured at all: it
folds to another frequency, and a cut that follows it reads whatever lies there.  A cut that
drops three decades near 880 rpm is then the acquisition, not the machine.

With a plan the usable edge is the plan's filter's
(:meth:`~workbench.sampling.filters.AntiAliasFilter.usable_edge_hz`); without one only the
run's rate is known and the edge is Nyquist.  A cut's band can also hold another predicted
line (a bearing order at 0.944 inside the order-1 cut's +-0.125): the cut then sums both and
beats between them; :func:`lines_in_cut_band` finds where.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench import checks
from workbench.checks import show
from workbench.errors import InputError

__all__ = ["ValidRegion", "valid_region", "lines_in_cut_band"]


@dataclass(frozen=True)
class ValidRegion:
    """The frequencies a run measures faithfully.

    Attributes
    ----------
    rate_hz : float
        Sample rate of the run, Hz.
    usable_hz : float
        Highest frequency measured without the filter's roll-off, Hz (the filter's usable edge,
        or Nyquist without a filter).
    source : str
        ``"filter"`` (from a plan's anti-alias filter) or ``"rate"`` (Nyquist alone).
    filter_text : str
        The filter's description (empty without one).
    """

    rate_hz: float
    usable_hz: float
    source: str = "rate"
    filter_text: str = ""

    @property
    def nyquist_hz(self) -> float:
        """Half the sample rate, Hz."""
        return 0.5 * self.rate_hz

    def max_order(self, rpm, *, edge="usable"):
        """Highest valid order at each speed: ``edge_hz / (rpm / 60)``.

        Parameters
        ----------
        rpm : array_like
            Speeds, rpm (> 0).
        edge : {"usable", "nyquist"}
        """
        hz = self.usable_hz if edge == "usable" else self.nyquist_hz
        rpm = np.asarray(rpm, dtype=float)
        with np.errstate(divide="ignore"):
            return hz * 60.0 / rpm

    def edge_rpm(self, order, *, edge="usable") -> float:
        """Speed above which ``order`` lies beyond the edge, rpm."""
        hz = self.usable_hz if edge == "usable" else self.nyquist_hz
        return hz * 60.0 / float(order)

    def to_dict(self) -> dict:
        """JSON form: ``usable_hz``, ``nyquist_hz``, ``source``, ``filter``."""
        return {"usable_hz": float(self.usable_hz), "nyquist_hz": float(self.nyquist_hz),
                "source": self.source, "filter": self.filter_text}

    def describe(self) -> str:
        """One line: what limits the valid region."""
        if self.source == "filter":
            return (f"usable band up to {self.usable_hz:.0f} Hz (the anti-alias filter's 1 dB edge: "
                    f"{self.filter_text}), Nyquist {self.nyquist_hz:g} Hz")
        return f"usable band up to Nyquist, {self.nyquist_hz:g} Hz (no filter model known)"


def valid_region(rate_hz, aa_filter=None) -> ValidRegion:
    """The valid region of a run at ``rate_hz``, from its anti-alias filter when known.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    aa_filter : AntiAliasFilter, optional
        The plan's filter (``Plan.filter``); without it the usable edge is Nyquist.

    Returns
    -------
    ValidRegion
    """
    rate = checks.rate_hz(None, "rate_hz", rate_hz)
    if aa_filter is None:
        return ValidRegion(rate, 0.5 * rate, "rate", "")
    if not hasattr(aa_filter, "usable_edge_hz"):
        raise InputError(f"aa_filter = {show(aa_filter)}: must be an "
                         "AntiAliasFilter (a plan's filter)")
    edge = min(float(aa_filter.usable_edge_hz(rate)), 0.5 * rate)
    text = aa_filter.describe() if hasattr(aa_filter, "describe") else str(aa_filter)
    return ValidRegion(rate, edge, "filter", str(text))


def lines_in_cut_band(lines, rate_hz, order, bandwidth_orders, rpm, *, own_tolerance=1e-6):
    """Predicted lines other than the cut's own that lie inside an order cut's band.

    Parameters
    ----------
    lines : sequence of Line
        The machine's lines.
    rate_hz : float
        Sample rate of the run, Hz (folded lines are placed at their apparent order).
    order, bandwidth_orders : float
        The cut: centre order and total width, orders.
    rpm : array_like
        Speeds to check, rpm (e.g. the cut's rows).
    own_tolerance : float
        An order line this close to ``order`` is the cut's own line, not a neighbour.

    Returns
    -------
    list of dict
        ``{"line", "order" (None for fixed lines), "zone", "rpm_min", "rpm_max"}``, one per
        line and Nyquist zone, in the order of the lines.
    """
    from workbench.angle.matching import predicted_orders

    rpm = np.unique(np.asarray(rpm, dtype=float))
    rpm = rpm[np.isfinite(rpm) & (rpm > 0)]
    lines = [ln for ln in lines if not (ln.order is not None and abs(ln.order - order) <= own_tolerance)]
    if not rpm.size or not lines:
        return []
    app, zone, _ = predicted_orders(lines, rate_hz, rpm)
    inside = np.abs(app - float(order)) <= 0.5 * float(bandwidth_orders)
    out = []
    for i, ln in enumerate(lines):
        for z in np.unique(zone[i][inside[i]]):
            sel = inside[i] & (zone[i] == z)
            out.append({"line": ln.name, "order": ln.order, "zone": int(z),
                        "rpm_min": float(rpm[sel].min()), "rpm_max": float(rpm[sel].max())})
    return out
