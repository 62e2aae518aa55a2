"""Acceptance limits drawn on the level they judge: an order cut or a band level against speed."""

from __future__ import annotations

import math

import numpy as np

from workbench.plots.common import new_figure

__all__ = ["plot_limit_checks"]

_PASS, _FAIL, _NOT = "#009E73", "#D55E00", "#999999"  # Wong 2011 palette (see common.py)


def plot_limit_checks(results, *, title=None):
    """Each limit's level against speed with its maximum drawn over its speed range.

    Parameters
    ----------
    results : sequence of LimitResult
        From :func:`workbench.runs.limits.evaluate_limits`.  One panel per limit: the order
        cut (order limits) or the band level (band limits) of every block, in the limit's
        measure (peak or RMS), the maximum as a dashed horizontal line across the limit's rpm
        range, and the worst level inside the range marked and labelled.

    Returns
    -------
    matplotlib.figure.Figure
    """
    results = tuple(results)
    n = max(1, len(results))
    fig = new_figure(width_in=10.0, height_in=1.0 + 2.1 * n)
    axes = fig.subplots(n, 1, squeeze=False)[:, 0]
    if not results:
        axes[0].text(0.5, 0.5, "no limits", ha="center", va="center", transform=axes[0].transAxes)
        axes[0].set_axis_off()
        return fig
    for ax, r in zip(axes, results):
        rpm = np.asarray(r.rpm, dtype=float)
        level = np.asarray(r.level, dtype=float)
        k = np.argsort(rpm)
        colour = _NOT if r.passed is None else (_PASS if r.passed else _FAIL)
        what = (f"band {r.limit.band}" if r.limit.band is not None
                else f"order {r.limit.order:g} (\u00b1{r.limit.bandwidth / 2:g})")
        ax.plot(rpm[k], level[k], lw=1.0, color="#0072B2", label=what)
        finite = rpm[np.isfinite(rpm)]
        lo, hi = (r.limit.rpm if r.limit.rpm is not None
                  else ((finite.min(), finite.max()) if finite.size else (0.0, 1.0)))
        ax.hlines(r.max, lo, hi, colors=colour, linestyles="--", lw=1.4,
                  label=f"max {r.max:g} {r.limit.amplitude}")
        if r.limit.rpm is not None:
            ax.axvspan(lo, hi, color=colour, alpha=0.06, lw=0)
        if math.isfinite(r.worst):
            ax.plot([r.rpm_at_worst], [r.worst], "o", color=colour, ms=5)
            ax.annotate(f"worst {r.worst:.3g} at {r.rpm_at_worst:.0f} rpm", (r.rpm_at_worst, r.worst),
                        textcoords="offset points", xytext=(6, 4), fontsize=8, color=colour)
        verdict = "not judged" if r.passed is None else ("passed" if r.passed else "FAILED")
        ax.set_title(f"{r.name}: {verdict}", fontsize=9, loc="left", color=colour)
        unit = f" ({r.unit})" if r.unit else ""
        ax.set_ylabel(f"{r.limit.amplitude}{unit}", fontsize=8)
        top = np.nanmax(np.append(level[np.isfinite(level)], r.max)) if level.size else r.max
        ax.set_ylim(0.0, 1.15 * float(top))
        ax.grid(True, lw=0.3, alpha=0.5)
        ax.legend(fontsize=7, loc="upper left")
        ax.tick_params(labelsize=8)
    axes[-1].set_xlabel("reference shaft speed (rpm)")
    if title:
        fig.suptitle(title, fontsize=10)
    return fig
