"""Verbs of the ``foldline`` command that touch runs, the demo, reports and batches."""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

from workbench.errors import FoldlineWarning, InputError

__all__ = ["add_verbs", "find_sample_runs"]

DEMO_MACHINE = "agitator_drive.toml"
DEMO_PLAN = "runup_plan.toml"
DEMO_RUN = "agitator_runup.wav"


def find_sample_runs() -> Path:
    """Folder holding the bundled demo scenario (``sample_runs/`` of the project)."""
    candidates = [Path.cwd() / "sample_runs", Path(__file__).resolve().parents[2] / "sample_runs"]
    for c in candidates:
        if (c / DEMO_MACHINE).is_file():
            return c
    raise InputError(
        "the demo files were not found: run 'foldline demo' from the project folder "
        "(the one holding sample_runs/), or pass --machine and --plan"
    )


def cmd_demo(args) -> int:
    """Run the main job on the bundled demo scenario and write the outputs to a folder."""
    from workbench.cli.main import _collision_records, _print_advice, _print_table, emit_json
    from workbench.machine import read_machine
    from workbench.plots import plot_fold_map, save_figure
    from workbench.sampling import find_collisions, fold_map, read_plan
    from workbench.sampling import advise

    base = None if (args.machine and args.plan) else find_sample_runs()
    machine_path = Path(args.machine) if args.machine else base / DEMO_MACHINE
    plan_path = Path(args.plan) if args.plan else base / DEMO_PLAN
    out = Path(args.out)
    machine = read_machine(machine_path)
    plan = read_plan(plan_path)
    plan.check_against(machine.lines())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        advice = advise(machine, plan)
    out.mkdir(parents=True, exist_ok=True)
    figures = []
    # Fold maps: the worst candidate (to show what a collision looks like) and the recommendation.
    worst = advice.candidates.sort_values(["collisions", "rate_hz"], ascending=[False, True]).iloc[0]
    rates = [float(worst["rate_hz"])]
    if advice.recommended_rate_hz is not None and advice.recommended_rate_hz not in rates:
        rates.append(float(advice.recommended_rate_hz))
    tables = {}
    for rate in rates:
        fmap = fold_map(machine, plan, rate)
        table = find_collisions(machine, plan, rate, fmap=fmap)
        tables[rate] = table
        for view in ("hz", "order"):
            path = out / f"foldmap_{rate:g}Hz_{view}.png"
            save_figure(plot_fold_map(fmap, plan, collisions=table, view=view), path, force=args.force)
            figures.append(str(path))
        csv_path = out / f"collisions_{rate:g}Hz.csv"
        _write_csv(table, csv_path, force=args.force)
        figures.append(str(csv_path))
    result = {
        "machine": str(machine_path),
        "plan": str(plan_path),
        "out": str(out),
        "advice": advice.to_dict(),
        "collisions": {f"{r:g}": _collision_records(t[t["kind"] == "collision"]) for r, t in tables.items()},
        "files": figures,
    }
    if args.json:
        emit_json(result)
        return 0
    print("foldline demo: the agitator drive run-up (invented scenario)\n")
    _print_advice(machine, plan, advice)
    for rate, table in tables.items():
        print(f"\n=== {rate:g} Hz ===")
        _print_table("collisions (folded lines inside a band)", table[table["kind"] == "collision"])
    print(f"\noutputs written to {out.resolve()}:")
    for f in figures:
        print(f"  {f}")
    print(
        "\nSafety: foldline plans acquisition and analysis only; follow the machine maker's limits, "
        "site procedures and local codes for the run-up itself."
    )
    return 0


def _write_csv(table, path, *, force=False):
    from workbench.runs import atomic_output

    with atomic_output(path, force=force) as tmp:
        table.to_csv(tmp, index=False)


def cmd_simulate(args) -> int:
    """Synthesize a run of the machine under the plan at one rate, written as WAV + sidecar."""
    import hashlib

    from workbench.cli.main import _positive, emit_json
    from workbench.machine import read_machine
    from workbench.runs import read_run, simulate_to_wav
    from workbench.sampling import read_plan

    machine = read_machine(args.machine)
    plan = read_plan(args.plan)
    rate = _positive(args.rate, "--rate")
    out = Path(args.out)
    if out.suffix.lower() != ".wav":
        raise InputError(f"--out {args.out}: the simulated run is written as WAV; give a name ending in .wav")
    machine_file = Path(args.machine) if Path(args.machine).resolve().parent == out.resolve().parent else None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FoldlineWarning)
        path = simulate_to_wav(
            machine,
            plan,
            rate,
            out,
            seed=args.seed,
            duration_s=args.duration,
            noise_db=args.noise_db,
            resonance_hz=args.resonance_hz,
            pulses_per_rev=args.pulses_per_rev,
            missing_pulses=args.missing_pulses,
            machine_file=machine_file,
            sample_format=args.format,
            force=args.force,
        )
    run = read_run(path)
    digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
    result = {
        "out": str(path),
        "sidecar": str(Path(path).with_suffix(".json")),
        "rate_hz": run.rate_hz,
        "duration_s": run.duration_s,
        "n_samples": run.n_samples,
        "channels": [c.name for c in run.channels],
        "tacho": run.tacho,
        "pulses_per_rev": run.pulses_per_rev,
        "missing_pulses": run.missing_pulses,
        "seed": args.seed,
        "sha256": digest,
    }
    for w in caught:
        _stderr(f"warning: {w.message}")
    if args.json:
        emit_json(result)
        return 0
    print(f"simulated {run.duration_s:.1f} s at {run.rate_hz:g} S/s -> {path} (+ sidecar), seed {args.seed}")
    print(f"channels: {', '.join(result['channels'])}; tacho: {run.tacho}, {run.pulses_per_rev} pulses/rev"
          + (f" with {run.missing_pulses} missing" if run.missing_pulses else ""))
    return 0


def add_verbs(verb) -> None:
    """Register the run, demo, report and batch verbs on the parser's sub-command factory."""
    p = verb("demo", "run the main job on the bundled demo scenario and write its outputs")
    p.add_argument("--out", default="out/demo", metavar="DIR", help="output folder (default out/demo)")
    p.add_argument("--machine", metavar="MACHINE", help="use this machine file instead of the demo's")
    p.add_argument("--plan", metavar="PLAN", help="use this plan file instead of the demo's")
    p.add_argument("--force", action="store_true", help="overwrite existing outputs in the folder")
    p.set_defaults(func=cmd_demo)

    p = verb("simulate", "synthesize a run of the machine under the plan at one rate (WAV + sidecar)")
    p.add_argument("machine", metavar="MACHINE")
    p.add_argument("plan", metavar="PLAN")
    p.add_argument("--rate", required=True, type=float, metavar="HZ", help="sample rate, Hz")
    p.add_argument("--out", required=True, metavar="RUN.wav", help="output WAV file (a .json sidecar is written beside it)")
    p.add_argument("--seed", type=int, default=0, help="random seed (same seed, same bytes)")
    p.add_argument("--duration", type=float, metavar="S", help="seconds to simulate (default: the profile's duration)")
    p.add_argument("--noise-db", type=float, default=-60.0, metavar="DB", help="broadband noise, dB re 1 unit RMS")
    p.add_argument("--resonance-hz", type=float, metavar="HZ", help="structural resonance, Hz (default 0.3 x rate)")
    p.add_argument("--pulses-per-rev", type=int, default=1, metavar="N", help="tacho tooth positions per rev")
    p.add_argument("--missing-pulses", type=int, default=0, metavar="M", help="missing teeth of the tacho wheel")
    p.add_argument("--format", choices=("float32", "int16", "int24", "int32"), default="float32", help="WAV sample format")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.set_defaults(func=cmd_simulate)

    _add_report_and_batch(verb)


def _add_report_and_batch(verb) -> None:
    """``foldline report`` and ``foldline batch`` (defined with their layers)."""
    from workbench.batch.command import add_batch_verb
    from workbench.report.command import add_report_verb

    add_report_verb(verb)
    add_batch_verb(verb)


def _stderr(msg: str) -> None:
    sys.stderr.write(msg + "\n")
