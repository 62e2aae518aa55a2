"""Benchmark: one control change of the fold map panel on the demo machine.

Times, in the Python process, from setting a control's value to the panel's figure, table and
verdict holding their new values (the observers run synchronously); sending the PNG to the
browser is not included.  Three changes, each first visit ("cold": nothing of that state
cached) and revisit ("warm"):

- rate change: a plan candidate (its collision table comes with the advice computed when the
  panel opens) and a rate that is not a candidate (its collisions are searched on the spot);
- source toggle: hide one entry's lines, show them again;
- view switch: Hz to orders and back.

Target (issue): under 150 ms each on the 2-core reference machine.
"""

from __future__ import annotations

import statistics
import sys
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def _time(control, value) -> float:
    t0 = time.perf_counter()
    control.value = value
    return time.perf_counter() - t0


def _ms(times) -> dict:
    return {"median_ms": 1e3 * statistics.median(times), "max_ms": 1e3 * max(times), "n": len(times)}


def main() -> dict:
    from workbench.errors import FoldlineWarning
    from workbench.ui import FoldMapPanel

    warnings.simplefilter("ignore", FoldlineWarning)
    t0 = time.perf_counter()
    panel = FoldMapPanel(ROOT / "sample_runs" / "agitator_drive.toml", ROOT / "sample_runs" / "runup_plan.toml")
    open_s = time.perf_counter() - t0
    start = panel.rate_hz.value
    candidates = [r for r in sorted(panel.plan.rates_hz) if r != start]
    others = [3000.0, 3500.0, 4000.0, 4500.0, 7000.0]

    rate_cold = [_time(panel.rate_choice, r) for r in candidates]
    rate_warm = [_time(panel.rate_choice, r) for r in [start] + candidates]
    free_cold = [_time(panel.rate_hz, r) for r in others]

    # Source toggles at 2560 Hz (a map full of folded lines and collisions).
    panel.rate_choice.value = 2560.0
    everything = panel.sources.value
    toggle_cold, toggle_warm = [], []
    for entry in everything[4:10]:
        toggle_cold.append(_time(panel.sources, tuple(e for e in everything if e != entry)))
        toggle_warm.append(_time(panel.sources, everything))
    for entry in everything[4:10]:
        toggle_warm.append(_time(panel.sources, tuple(e for e in everything if e != entry)))
        toggle_warm.append(_time(panel.sources, everything))

    view_cold, view_warm = [], []
    for r in sorted(panel.plan.rates_hz):
        panel.rate_choice.value = r
        view_cold.append(_time(panel.view, "order"))
        view_warm.append(_time(panel.view, "hz"))
        view_warm.append(_time(panel.view, "order"))
        panel.view.value = "hz"

    result = {
        "panel_open_s": open_s,
        "rate_change_candidate_cold": _ms(rate_cold),
        "rate_change_other_rate_cold": _ms(free_cold),
        "rate_change_warm": _ms(rate_warm),
        "source_toggle_cold": _ms(toggle_cold),
        "source_toggle_warm": _ms(toggle_warm),
        "view_switch_cold": _ms(view_cold),
        "view_switch_warm": _ms(view_warm),
        "target_ms": 150.0,
    }
    print(f"fold map panel, demo machine ({len(panel.lines)} lines, {len(panel.plan.bands)} bands); "
          f"opens in {open_s:.2f} s; target {result['target_ms']:.0f} ms per change")
    for key, value in result.items():
        if isinstance(value, dict):
            print(f"  {key:30s} median {value['median_ms']:7.1f} ms   max {value['max_ms']:7.1f} ms   "
                  f"({value['n']} changes)")
    return result


if __name__ == "__main__":
    main()
