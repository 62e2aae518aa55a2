"""Benchmark: fold map of 200 lines x 5000 speeds x 1 rate, and the advisor over 8 rates.

Targets (issue): each under 50 ms on the 2-core reference machine.
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def _best_of(fn, repeat=7):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times), float(np.median(times))


def _big_machine(n_lines=200):
    from workbench.machine import machine_from_dict

    rng = np.random.default_rng(1)
    orders = np.sort(rng.uniform(0.3, 120.0, n_lines - 1))  # plus the shaft line
    return machine_from_dict(
        {
            "machine": {"name": "benchmark", "reference": "input"},
            "shaft": [{"name": "input"}],
            "order": [{"name": f"o{i}", "shaft": "input", "order": float(o), "level_db": -float(i % 40)} for i, o in enumerate(orders)],
        }
    )


def main() -> dict:
    from workbench.machine import read_machine
    from workbench.sampling import advise, find_collisions, fold_map, read_plan

    plan = read_plan(ROOT / "sample_runs" / "runup_plan.toml")
    big = _big_machine()
    lines = big.lines()
    assert len(lines) == 200
    from workbench.sampling import plan_from_dict, plan_to_dict

    d = plan_to_dict(plan)
    d["band"] = [{"name": "hz band", "hz": [600.0, 700.0]}, {"name": "order band", "orders": [3.0, 6.0]}]
    big_plan = plan_from_dict(d)
    fm_best, fm_med = _best_of(lambda: fold_map(lines, big_plan, 5120.0, n_speeds=5000).residual_db)
    full_best, full_med = _best_of(
        lambda: find_collisions(lines, big_plan, 5120.0, n_speeds=5000), repeat=3
    )
    machine = read_machine(ROOT / "sample_runs" / "agitator_drive.toml")
    rates = [2560.0, 3200.0, 5120.0, 6400.0, 8192.0, 10240.0, 12800.0, 25600.0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        adv_best, adv_med = _best_of(lambda: advise(machine, plan, rates_hz=rates), repeat=5)
    out = {
        "fold_map_200x5000_ms": fm_best * 1e3,
        "fold_map_plus_collisions_200x5000_ms": full_best * 1e3,
        "advisor_8_rates_demo_ms": adv_best * 1e3,
    }
    print("fold map, 200 lines x 5000 speeds x 1 rate: best %.1f ms (median %.1f ms)  target < 50 ms" % (fm_best * 1e3, fm_med * 1e3))
    print("  + collisions with exact edges (2 bands):   best %.1f ms (median %.1f ms)" % (full_best * 1e3, full_med * 1e3))
    print("advisor, demo machine, 8 candidate rates:    best %.1f ms (median %.1f ms)  target < 50 ms" % (adv_best * 1e3, adv_med * 1e3))
    return out


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    main()
