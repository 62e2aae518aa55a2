"""Batch layer: many runs tracked with the same settings, serially or on a Dask cluster.

Dask is imported only when a batch runs on a cluster, so ``import workbench.batch`` stays light.

Typical use::

    from workbench.batch import BatchSettings, run_batch
    settings = BatchSettings.make(track={"samples_per_rev": 256}, plan_path="plan.toml")
    result = run_batch(["a.wav", "b.wav"], "out/", settings=settings, workers=2)
    result.summary        # one row per run: levels per band, top orders, aliases, status
"""

from workbench._lazy import lazy_names

# Imported on first use (PEP 562): registering the ``batch`` verb must not import pandas.
_LAZY = {
    "workbench.batch.core": ("BASE_COLUMNS", "LEVEL_PREFIX", "META_COLUMNS", "PASS_PREFIX",
                             "WORST_PREFIX", "SUMMARY_NAME", "TAIL_COLUMNS",
                             "BatchResult", "BatchSettings", "process_run", "read_summary",
                             "run_batch"),
    "workbench.batch.levels": ("band_level_series", "band_levels"),
}
__getattr__, __dir__ = lazy_names(__name__, _LAZY, globals())


__all__ = ["BatchSettings", "BatchResult", "process_run", "run_batch", "read_summary",
           "band_levels", "band_level_series", "BASE_COLUMNS", "TAIL_COLUMNS", "LEVEL_PREFIX",
           "SUMMARY_NAME", "PASS_PREFIX", "WORST_PREFIX", "META_COLUMNS"]
