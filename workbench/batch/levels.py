"""Band levels of the batch summary: the one definition lives in :mod:`workbench.runs.levels`.

Kept so that ``from workbench.batch.levels import band_levels`` goes on working; the batch
summary and the acceptance limits (:mod:`workbench.runs.limits`) share that implementation.
"""

from workbench.runs.levels import band_level_series, band_levels

__all__ = ["band_levels", "band_level_series"]
