"""Benchmark: 40 simulated runs of 60 s at 25.6 kHz tracked as a batch with 1 and 2 Dask workers.

The runs (demo machine and plan, one seed each, float32 WAV + sidecar, about 12 MB each) are
generated once into a temporary folder by the streaming simulator, two at a time.  Each batch
starts its own local cluster (``LocalCluster(n_workers=N, threads_per_worker=1,
processes=True)``) and writes into a fresh folder, so no run is skipped; the wall time includes
the cluster start, the hashing of the inputs and the summary writing, as a user would see it.

Target (issue): at least 1.7 x the runs per minute with 2 workers as with 1, on the 2-core
reference machine.  Two figures are printed: overall (the whole command) and once running
(between the first and the last run finishing).  They differ by the cluster's fixed cost (start
the worker processes, import numpy/scipy/pandas in each, stop them: a few seconds), which
weighs on a batch whose runs take a fraction of a second each.  Each configuration runs ``--rounds`` times (alternating); the fastest round
of each is reported.

Usage: ``python bench/bench_batch.py [--runs N] [--rounds R] [--keep DIR]`` (``--keep`` reuses
or keeps the generated runs in DIR).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
import warnings
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
MACHINE = ROOT / "sample_runs" / "agitator_drive.toml"
PLAN = ROOT / "sample_runs" / "runup_plan.toml"
RATE_HZ = 25600.0
DURATION_S = 60.0


def _simulate(args):
    path, seed = args
    from workbench.errors import FoldlineWarning
    from workbench.machine import read_machine
    from workbench.runs import simulate_to_wav
    from workbench.sampling import read_plan

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        simulate_to_wav(read_machine(MACHINE), read_plan(PLAN), RATE_HZ, path, seed=seed,
                        duration_s=DURATION_S, noise_db=-50.0)
    return path


def generate(folder: Path, n_runs: int) -> list[Path]:
    """Simulate ``n_runs`` runs into ``folder`` (existing complete runs are reused)."""
    folder.mkdir(parents=True, exist_ok=True)
    paths = [folder / f"runup_{i:03d}.wav" for i in range(n_runs)]
    todo = [(p, 100 + i) for i, p in enumerate(paths)
            if not (p.is_file() and p.with_suffix(".json").is_file())]
    if todo:
        with ProcessPoolExecutor(max_workers=2) as pool:
            list(pool.map(_simulate, todo))
    return paths


def _batch(paths, out: Path, workers: int) -> dict:
    from workbench.batch import BatchSettings, run_batch
    from workbench.machine import read_machine
    from workbench.report import default_cut_orders
    from workbench.sampling import read_plan

    cuts = default_cut_orders(read_machine(MACHINE), read_plan(PLAN), max_order=100.0)
    settings = BatchSettings.make(track={"samples_per_rev": 256}, machine_path=str(MACHINE),
                                  plan_path=str(PLAN), cut_orders=cuts)
    finished_at = []

    def progress(finished, total, skipped, failed):
        if finished:
            finished_at.append(time.perf_counter())

    load_before = os.getloadavg()[0]
    t0 = time.perf_counter()
    result = run_batch(paths, out, settings=settings, workers=workers, progress=progress)
    wall = time.perf_counter() - t0
    ok = int((result.summary["status"] == "ok").sum())
    if ok != len(paths):
        errors = result.summary.loc[result.summary["status"] != "ok", "error"].tolist()
        raise RuntimeError(f"{len(paths) - ok} run(s) failed: {errors[:3]}")
    per_run = result.summary["seconds"].to_numpy()
    steady = (len(finished_at) - 1) / (finished_at[-1] - finished_at[0]) * 60.0
    return {
        "workers": workers,
        "wall_s": wall,
        "runs_per_minute": 60.0 * len(paths) / wall,
        # Between the first and the last run finishing: without cluster start and stop.
        "steady_runs_per_minute": steady,
        "first_result_s": finished_at[0] - t0,
        "median_task_s": float(sorted(per_run)[len(per_run) // 2]),
        "load_before": load_before,
    }


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=40)
    parser.add_argument("--keep", metavar="DIR", help="folder for the generated runs (kept)")
    parser.add_argument("--rounds", type=int, default=3, help="alternating rounds; best of each kept")
    args = parser.parse_args(argv if argv is not None else [])
    with tempfile.TemporaryDirectory(prefix="foldline-bench-batch-") as tmp:
        runs_dir = Path(args.keep) if args.keep else Path(tmp) / "runs"
        t0 = time.perf_counter()
        paths = generate(runs_dir, args.runs)
        gen_s = time.perf_counter() - t0
        size_mb = sum(p.stat().st_size for p in paths) / 1e6
        print(f"{len(paths)} runs of {DURATION_S:g} s at {RATE_HZ:g} S/s ({size_mb:.0f} MB) ready in "
              f"{gen_s:.1f} s", flush=True)
        # Best of several alternating rounds: the machine may be shared, and the least disturbed
        # round of each configuration is the one that shows what the code does.
        results = {}
        for round_ in range(args.rounds):
            for workers in (1, 2):
                r = _batch(paths, Path(tmp) / f"out_{workers}_{round_}", workers)
                print(f"  round {round_ + 1}, {workers} worker(s): {r['wall_s']:.1f} s "
                      f"(load average before {r['load_before']:.1f})", flush=True)
                if workers not in results or r["wall_s"] < results[workers]["wall_s"]:
                    results[workers] = r
        for workers in (1, 2):
            r = results[workers]
            print(f"{workers} worker(s): {r['wall_s']:.1f} s, {r['runs_per_minute']:.1f} runs/min "
                  f"overall; {r['steady_runs_per_minute']:.1f} runs/min once running (first result "
                  f"after {r['first_result_s']:.1f} s; median {r['median_task_s']:.2f} s per run "
                  f"inside a task; load average before {r['load_before']:.1f})", flush=True)
    speedup = results[2]["runs_per_minute"] / results[1]["runs_per_minute"]
    steady = results[2]["steady_runs_per_minute"] / results[1]["steady_runs_per_minute"]
    print(f"speed-up with 2 workers: {speedup:.2f} x overall, {steady:.2f} x once running "
          "(target >= 1.7 x)")
    return {
        "runs": len(paths),
        "run_duration_s": DURATION_S,
        "rate_hz": RATE_HZ,
        "generate_s": gen_s,
        "runs_per_minute_1_worker": results[1]["runs_per_minute"],
        "runs_per_minute_2_workers": results[2]["runs_per_minute"],
        "wall_s_1_worker": results[1]["wall_s"],
        "wall_s_2_workers": results[2]["wall_s"],
        "speedup_2_workers": speedup,
        "steady_runs_per_minute_1_worker": results[1]["steady_runs_per_minute"],
        "steady_runs_per_minute_2_workers": results[2]["steady_runs_per_minute"],
        "steady_speedup_2_workers": steady,
    }


if __name__ == "__main__":
    main(sys.argv[1:])
