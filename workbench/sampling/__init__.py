"""Sampling layer: folding, anti-alias filters, speed profiles, test plans.

Pure math of acquisition.  Imports only numpy, scipy, pandas and the standard library (and the
machine layer's line objects, by duck typing).
"""

from workbench.sampling.filters import (ANALOG_KINDS, FILTER_KINDS, MAX_ANALOG_ORDER,
                                        TABLE_UNITS, AntiAliasFilter)
from workbench.sampling.folding import apparent_frequency, apparent_order, fold, nyquist_zone
from workbench.sampling.plan import (DEFAULT_THRESHOLD_DB, LIMIT_AMPLITUDES, Band, Limit, Plan,
                                     plan_from_dict,
                                     plan_to_dict, read_plan, write_plan)
from workbench.sampling.profiles import PROFILE_KINDS, SpeedProfile, read_speed_table
from workbench.sampling.foldmap import COLLISION_COLUMNS, FoldMap, find_collisions, fold_map
from workbench.sampling.advisor import (STANDARD_RATES_HZ, Advice, AngleSettings, advise,
                                        angle_settings, min_rate_for)

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
    "FoldMap",
    "fold_map",
    "find_collisions",
    "STANDARD_RATES_HZ",
    "Advice",
    "AngleSettings",
    "advise",
    "angle_settings",
    "min_rate_for",
]
