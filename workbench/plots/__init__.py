"""Matplotlib figures (presentation layer).

Figures are built with the object-oriented API on a ``matplotlib.figure.Figure`` (no pyplot
state), so they are safe in scripts, notebooks, threads and Dask workers.
"""

from workbench.plots.foldmap import plot_fold_map
from workbench.plots.common import save_figure, new_figure

__all__ = ["plot_fold_map", "save_figure", "new_figure"]
