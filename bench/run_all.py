"""Run every benchmark of the project and print its figures (``make bench``)."""

from __future__ import annotations

import importlib
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

BENCHMARKS = ["bench_foldmap", "bench_tracking", "bench_channels", "bench_ui", "bench_memory",
              "bench_batch", "bench_vold_kalman", "bench_speed", "bench_criticals"]


def main(argv=None) -> int:
    names = (argv or sys.argv[1:]) or BENCHMARKS
    for name in names:
        if not (HERE / f"{name}.py").exists():
            continue
        print(f"\n=== {name} ===", flush=True)
        importlib.import_module(name).main()
    return 0


if __name__ == "__main__":
    sys.exit(main())
