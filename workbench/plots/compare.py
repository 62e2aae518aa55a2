"""Figures comparing runs aligned on speed: order cuts, overall level, order spectra."""

from __future__ import annotations

import numpy as np

from workbench.plots.common import new_figure

__all__ = ["plot_compare_cuts", "plot_compare_overall", "plot_compare_spectra"]


def plot_compare_cuts(comparison, *, title=None, log=True):
    """One panel per cut order, every run's cut against rpm on the common speed grid."""
    orders = list(comparison.cuts)
    n = max(1, len(orders))
    fig = new_figure(width_in=10.0, height_in=2.6 * n + 0.8)
    axes = fig.subplots(n, 1, sharex=True, squeeze=False)[:, 0]
    for ax, o in zip(axes, orders):
        for i, lab in enumerate(comparison.labels):
            d = comparison.runs.iloc[i]["direction"]
            ax.plot(comparison.rpm, comparison.cuts[o][i], lw=1.0, label=f"{lab} ({d})")
        if log:
            ax.set_yscale("log")
        ax.set_ylabel(f"order {o:g}\npeak{(' (' + comparison.unit + ')') if comparison.unit else ''}")
        ax.grid(True, lw=0.3, alpha=0.5, which="both")
    if orders:
        axes[0].legend(fontsize=7)
    axes[-1].set_xlabel("reference shaft speed (rpm)")
    axes[0].set_title(title or "Order cuts of the runs, aligned on speed", fontsize=10)
    return fig


def plot_compare_overall(comparison, *, title=None):
    """Every run's overall RMS level against rpm."""
    fig = new_figure(width_in=10.0, height_in=4.2)
    ax = fig.add_subplot()
    if comparison.overall is not None:
        for i, lab in enumerate(comparison.labels):
            ax.plot(comparison.rpm, comparison.overall[i], lw=1.2, label=lab)
        ax.legend(fontsize=8)
    ax.set_xlabel("reference shaft speed (rpm)")
    ax.set_ylabel(f"overall RMS{(' (' + comparison.unit + ')') if comparison.unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5)
    ax.set_title(title or "Overall level of the runs, aligned on speed", fontsize=10)
    return fig


def plot_compare_spectra(comparison, *, title=None, max_order=None, log=True):
    """Every run's averaged order spectrum."""
    fig = new_figure(width_in=10.0, height_in=4.5)
    ax = fig.add_subplot()
    order = np.asarray(comparison.order)
    top = float(order[-1]) if max_order is None else float(max_order)
    sel = order <= top
    for i, lab in enumerate(comparison.labels):
        ax.plot(order[sel], comparison.spectra[i][sel], lw=0.8, alpha=0.85, label=lab)
    if log:
        ax.set_yscale("log")
    ax.set_xlim(0, top)
    ax.set_xlabel("order (multiples of reference shaft speed)")
    ax.set_ylabel(f"amplitude, peak{(' (' + comparison.unit + ')') if comparison.unit else ''}")
    ax.grid(True, lw=0.3, alpha=0.5, which="both")
    ax.legend(fontsize=8)
    ax.set_title(title or "Order spectra of the runs (each averaged over its own run)", fontsize=10)
    return fig
