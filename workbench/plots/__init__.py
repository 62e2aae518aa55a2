"""Matplotlib figures (presentation layer).

Figures are built with the object-oriented API on a ``matplotlib.figure.Figure`` (no pyplot
state), so they are safe in scripts, notebooks, threads and Dask workers.
"""

from workbench.plots.angle import (plot_order_cuts, plot_order_envelopes, plot_order_map,
                                   plot_order_spectrum, plot_frequency_map, plot_tacho_check,
                                   speed_check_options)
from workbench.plots.criticals import plot_bode, plot_campbell, plot_polar, run_up_figures
from workbench.plots.common import figure_bytes, new_figure, save_figure
from workbench.plots.foldmap import draw_fold_map, plot_fold_map
from workbench.plots.angle import plot_overall_level, plot_waterfall  # noqa: E402

__all__ = [
    "plot_fold_map",
    "draw_fold_map",
    "plot_tacho_check",
    "speed_check_options",
    "plot_order_spectrum",
    "plot_order_map",
    "plot_order_cuts",
    "plot_order_envelopes",
    "plot_frequency_map",
    "plot_bode",
    "plot_polar",
    "plot_campbell",
    "run_up_figures",
    "save_figure",
    "new_figure",
    "figure_bytes",
]
__all__ += ["plot_overall_level", "plot_waterfall"]
