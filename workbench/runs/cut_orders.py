"""Default order cuts of a tracked run, from the machine and the plan."""

from __future__ import annotations

__all__ = ["default_cut_orders"]


def default_cut_orders(machine, plan, *, max_order=None) -> tuple:
    """Orders to cut by default: order 1 and the order of every line a plan band follows.

    Parameters
    ----------
    machine : Machine
    plan : Plan
    max_order : float, optional
        Leave out orders above this.

    Returns
    -------
    tuple of float
        Distinct orders, ascending.
    """
    orders = {1.0}
    by_name = {ln.name: ln for ln in machine.lines()}
    for band in plan.bands:
        if band.kind == "around":
            ln = by_name.get(band.around)
            if ln is not None and ln.order is not None:
                orders.add(round(float(ln.order), 6))
    out = sorted(o for o in orders if max_order is None or o <= max_order)
    return tuple(out)
