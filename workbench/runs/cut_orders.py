"""The one rule for the orders cut out of a tracked run's order map when none are asked for."""

from __future__ import annotations

__all__ = ["default_cut_orders"]


def default_cut_orders(machine=None, plan=None, *, max_order=None, peaks=None) -> tuple:
    """Orders to cut by default.

    The rule: order 1; the order of every machine line a plan band follows (with a machine and
    a plan); and, when these give nothing beyond order 1, the three strongest measured peaks
    (when the peaks are known).  Used by ``track``, ``report``, ``batch``, the demo and the
    angle-domain panel, through :meth:`~workbench.runs.settings.TrackingSettings.cut_orders_for`
    when the settings are known.

    Parameters
    ----------
    machine : Machine, optional
    plan : Plan, optional
    max_order : float, optional
        Leave out orders above this.
    peaks : pandas.DataFrame or OrderPeaks, optional
        The measured peaks, strongest first (an ``order`` column or attribute).

    Returns
    -------
    tuple of float
        Distinct orders, ascending.
    """
    orders = {1.0}
    if machine is not None and plan is not None:
        by_name = {ln.name: ln for ln in machine.lines()}
        for band in plan.bands:
            if band.kind == "around":
                ln = by_name.get(band.around)
                if ln is not None and ln.order is not None:
                    orders.add(round(float(ln.order), 6))
    if len(orders) == 1 and peaks is not None:
        orders.update(round(float(o), 3) for o in list(peaks.order)[:3] if float(o) > 0)
    return tuple(sorted(o for o in orders if max_order is None or o <= max_order))
