"""``foldline demo``: the main job on the bundled demo scenario, its outputs written to a folder."""

from __future__ import annotations

import warnings
from pathlib import Path

from workbench.cli.output import check_out_folder, finish, write_csv
from workbench.cli.verbs import add_verb
from workbench.errors import FoldlineWarning, InputError

__all__ = ["register", "cmd_demo", "find_sample_runs", "DEMO_MACHINE", "DEMO_PLAN", "DEMO_RUN"]

DEMO_MACHINE = "agitator_drive.toml"
DEMO_PLAN = "runup_plan.toml"
DEMO_RUN = "agitator_runup.wav"


def find_sample_runs() -> Path:
    """Folder holding the bundled demo scenario (``sample_runs/`` of the project)."""
    candidates = [Path.cwd() / "sample_runs", Path(__file__).resolve().parents[3] / "sample_runs"]
    for c in candidates:
        if (c / DEMO_MACHINE).is_file():
            return c
    raise InputError(
        "the demo files were not found: run 'foldline demo' from the project folder "
        "(the one holding sample_runs/), or pass --machine and --plan"
    )


def cmd_demo(args) -> int:
    """Run the main job on the bundled demo scenario and write the outputs to a folder."""
    from workbench.cli.verbs.foldmap import collision_records, print_collisions
    from workbench.cli.verbs.plan import print_advice
    from workbench.cli.verbs.track import (TRACK_FILES, judge_limits, print_limits, print_track,
                                           write_track_outputs)
    from workbench.machine import read_machine
    from workbench.plots import plot_fold_map, save_figure
    from workbench.sampling import advise, find_collisions, fold_map, read_plan

    base = None if (args.machine and args.plan) else find_sample_runs()
    machine_path = Path(args.machine) if args.machine else base / DEMO_MACHINE
    plan_path = Path(args.plan) if args.plan else base / DEMO_PLAN
    out = Path(args.out)
    check_out_folder(out, force=args.force, hint="; give a folder for the demo's outputs")
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
        figures.append(str(write_csv(table, out / f"collisions_{rate:g}Hz.csv", force=args.force)))
    # The recorded run, tracked in the angle domain with the prediction overlaid.
    run_path = Path(args.run) if args.run else (base / DEMO_RUN if base is not None else None)
    analysis = None
    if run_path is not None:
        from workbench.runs.analysis import track_run
        from workbench.runs.settings import TrackingSettings

        # the plan's angle settings, filter and cut orders: those the report states
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FoldlineWarning)
            analysis = track_run(run_path, machine=machine, plan=plan,
                                 settings=TrackingSettings.for_plan(machine, plan))
        track_dir = out / "run"
        check_out_folder(track_dir, TRACK_FILES, force=args.force)
        figures.extend(str(f) for f in write_track_outputs(analysis, track_dir, force=args.force))
    figures.append(_demo_report(machine_path, plan_path, run_path, analysis, out, args.force))
    result = {
        "machine": str(machine_path),
        "plan": str(plan_path),
        "out": str(out),
        "advice": advice.to_dict(),
        "collisions": {f"{r:g}": collision_records(t[t["kind"] == "collision"]) for r, t in tables.items()},
        "files": figures,
    }
    limits = judge_limits(analysis, plan) if analysis is not None else None
    if analysis is not None:
        result["run"] = {"file": str(run_path), **{k: v for k, v in analysis.to_dict().items() if k != "order_spectrum"}}
        if limits is not None:
            result["run"]["limits"] = [r.to_dict() for r in limits]

    def show():
        print("foldline demo: the agitator drive run-up (invented scenario)\n")
        print_advice(machine, plan, advice)
        for rate, table in tables.items():
            print(f"\n=== {rate:g} Hz ===")
            print_collisions("collisions (folded lines inside a band)", table[table["kind"] == "collision"])
        if analysis is not None:
            print(f"\n=== recorded run {run_path.name} (made at {analysis.rate_hz:g} S/s) ===")
            print_track(analysis, [])
            print_limits(limits)
        print(f"\noutputs written to {out.resolve()}:")
        for f in figures:
            print(f"  {f}")
        print(
            "\nSafety: foldline plans acquisition and analysis only; follow the machine maker's limits, "
            "site procedures and local codes for the run-up itself."
        )

    return finish(args, result, show)


def _demo_report(machine_path, plan_path, run_path, analysis, out, force) -> str:
    """The demo's self-contained HTML report (``report.html``), with the tracked run in it.

    ``analysis`` is the run the demo tracked already (reused, not tracked again).
    """
    from workbench.report.document import write_report

    path = Path(out) / "report.html"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        write_report(machine_path, plan_path, run_path, out=path, force=force, analysis=analysis)
    return str(path)


def register(subparsers) -> None:
    """Add ``foldline demo`` to the command."""
    p = add_verb(subparsers, "demo", "run the main job on the bundled demo scenario and write its outputs")
    p.add_argument("--out", default="out/demo", metavar="DIR", help="output folder (default out/demo)")
    p.add_argument("--machine", metavar="MACHINE", help="use this machine file instead of the demo's")
    p.add_argument("--plan", metavar="PLAN", help="use this plan file instead of the demo's")
    p.add_argument("--run", metavar="RUN", help="track this recorded run instead of the demo's")
    p.add_argument("--force", action="store_true", help="overwrite existing outputs in the folder")
    p.set_defaults(func=cmd_demo)
