"""Sampling layer: folding, anti-alias filters, speed profiles, test plans.

Pure math of acquisition.  Imports only numpy, scipy, pandas and the standard library (and the
machine layer's line objects, by duck typing).
"""

from workbench._lazy import lazy_names

# Names are imported on first use (PEP 562), so that a verb needing only the folding rule
# (``foldline alias``) does not pay for pandas and the fold-map machinery.
_LAZY = {
    "workbench.sampling.filters": ("ANALOG_KINDS", "FILTER_KINDS", "MAX_ANALOG_ORDER",
                                   "TABLE_UNITS", "AntiAliasFilter"),
    "workbench.sampling.folding": ("apparent_frequency", "apparent_order", "fold",
                                   "nyquist_zone"),
    "workbench.sampling.plan": ("DEFAULT_THRESHOLD_DB", "LIMIT_AMPLITUDES", "Band", "Limit",
                                "Plan"),
    "workbench.sampling.planfile": ("plan_from_dict", "plan_to_dict", "read_plan", "write_plan"),
    "workbench.sampling.profiles": ("PROFILE_KINDS", "SpeedProfile", "read_speed_table"),
    "workbench.sampling.foldmap": ("COLLISION_COLUMNS", "COLLISION_DECIMALS", "COLLISION_HEADINGS",
                                   "FoldMap", "find_collisions", "fold_map"),
    "workbench.sampling.resonance": ("CROSSING_COLUMNS", "PEAK_LOSS_LIMIT_DB", "Crossing",
                                     "fastest_sweep_rpm_per_s", "find_crossings",
                                     "passage_loss_db", "passage_peak_ratio"),
    "workbench.sampling.advisor": ("ANALYSER_FACTOR", "STANDARD_RATES_HZ", "Advice", "AngleSettings", "advise",
                                   "angle_settings", "min_rate_for"),
}
__getattr__, __dir__ = lazy_names(__name__, _LAZY, globals())


__all__ = [
    "apparent_frequency",
    "nyquist_zone",
    "apparent_order",
    "fold",
    "FILTER_KINDS",
    "ANALOG_KINDS",
    "TABLE_UNITS",
    "MAX_ANALOG_ORDER",
    "AntiAliasFilter",
    "PROFILE_KINDS",
    "SpeedProfile",
    "read_speed_table",
    "DEFAULT_THRESHOLD_DB",
    "Band",
    "Limit",
    "LIMIT_AMPLITUDES",
    "Plan",
    "read_plan",
    "plan_from_dict",
    "plan_to_dict",
    "write_plan",
    "COLLISION_COLUMNS",
    "COLLISION_DECIMALS",
    "COLLISION_HEADINGS",
    "FoldMap",
    "fold_map",
    "find_collisions",
    "ANALYSER_FACTOR",
    "STANDARD_RATES_HZ",
    "Advice",
    "AngleSettings",
    "advise",
    "angle_settings",
    "min_rate_for",
    "CROSSING_COLUMNS",
    "PEAK_LOSS_LIMIT_DB",
    "Crossing",
    "fastest_sweep_rpm_per_s",
    "find_crossings",
    "passage_loss_db",
    "passage_peak_ratio",
]
