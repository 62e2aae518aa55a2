"""Benchmark: order tracks with phase and critical speeds of a run, and the planner's crossings.

Figures: order tracks (orders 1 and 2) and criticals of the bundled demo run (60 s at 2560 S/s)
without the frequency map; crossings of a 200-line machine with 5 resonances.
"""

from __future__ import annotations

import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def _best_of(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    from workbench.errors import FoldlineWarning
    from workbench.machine import machine_from_dict
    from workbench.runs.criticals import run_criticals
    from workbench.sampling import plan_from_dict
    from workbench.sampling.resonance import find_crossings, max_sweep_kappa

    run = ROOT / "sample_runs" / "agitator_runup.wav"
    t = _best_of(lambda: run_criticals(run, rf_map=False))
    print(f"criticals of the demo run (60 s, 2560 S/s, orders 1 and 2): {t * 1e3:.0f} ms "
          f"({60.0 / t:.0f} x real time)")
    rng = np.random.default_rng(1)
    machine = machine_from_dict({
        "machine": {"name": "bench", "reference": "input"}, "shaft": [{"name": "input"}],
        "order": [{"name": f"o{i}", "shaft": "input", "order": float(o)}
                  for i, o in enumerate(np.sort(rng.uniform(0.3, 120.0, 199)))],
        "resonance": [{"name": f"r{i}", "hz": float(f), "damping_ratio": 0.03}
                      for i, f in enumerate((9.0, 22.0, 140.0, 700.0, 2300.0))]})
    plan = plan_from_dict({"speed": {"profile": "linear", "start_rpm": 300.0, "end_rpm": 3000.0,
                                     "duration_s": 60.0}, "acquisition": {"rates_hz": [25600.0]}})
    max_sweep_kappa(1.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        t0 = time.perf_counter()
        table = find_crossings(machine.lines(), plan.speed, resonances=machine.resonances)
        t = time.perf_counter() - t0
    print(f"crossings of 200 lines with 5 resonances: {len(table)} crossings in {t * 1e3:.0f} ms")


if __name__ == "__main__":
    main()
