"""Verbs of the ``foldline`` command that touch runs, the demo, reports and batches."""

from __future__ import annotations

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
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder; give a folder for the demo's outputs")
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
        _check_out_folder(track_dir, force=args.force)
        figures.extend(str(f) for f in write_track_outputs(analysis, track_dir, force=args.force))
    figures.append(_demo_report(machine_path, plan_path, run_path, analysis, out, args.force))
    result = {
        "machine": str(machine_path),
        "plan": str(plan_path),
        "out": str(out),
        "advice": advice.to_dict(),
        "collisions": {f"{r:g}": _collision_records(t[t["kind"] == "collision"]) for r, t in tables.items()},
        "files": figures,
    }
    limits = _judge_limits(analysis, plan) if analysis is not None else None
    if analysis is not None:
        result["run"] = {"file": str(run_path), **{k: v for k, v in analysis.to_dict().items() if k != "order_spectrum"}}
        if limits is not None:
            result["run"]["limits"] = [r.to_dict() for r in limits]
    if args.json:
        emit_json(result)
        return 0
    print("foldline demo: the agitator drive run-up (invented scenario)\n")
    _print_advice(machine, plan, advice)
    for rate, table in tables.items():
        print(f"\n=== {rate:g} Hz ===")
        _print_table("collisions (folded lines inside a band)", table[table["kind"] == "collision"])
    if analysis is not None:
        print(f"\n=== recorded run {run_path.name} (made at {analysis.rate_hz:g} S/s) ===")
        _print_track(analysis, [])
        _print_limits(limits)
    print(f"\noutputs written to {out.resolve()}:")
    for f in figures:
        print(f"  {f}")
    print(
        "\nSafety: foldline plans acquisition and analysis only; follow the machine maker's limits, "
        "site procedures and local codes for the run-up itself."
    )
    return 0


def _demo_report(machine_path, plan_path, run_path, analysis, out, force) -> str:
    """The demo's self-contained HTML report (``report.html``), with the tracked run in it."""
    from workbench.report.command import demo_report

    return str(demo_report(machine_path, plan_path, run_path, out, analysis=analysis, force=force))


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
    from workbench.sampling.guards import warn_implausible_rate

    warn_implausible_rate(rate, lines=machine.lines(), top_rpm=plan.speed.rpm_max, name="--rate")
    out = Path(args.out)
    if out.suffix.lower() != ".wav":
        raise InputError(f"--out {args.out}: the simulated run is written as WAV; give a name ending in .wav")
    machine_file = Path(args.machine) if Path(args.machine).resolve().parent == out.resolve().parent else None
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
        tacho_rise_s=None if args.tacho_rise_ms is None else args.tacho_rise_ms / 1000.0,
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
    if args.json:
        emit_json(result)
        return 0
    print(f"simulated {run.duration_s:.1f} s at {run.rate_hz:g} S/s -> {path} (+ sidecar), seed {args.seed}")
    print(f"channels: {', '.join(result['channels'])}; tacho: {run.tacho}, {run.pulses_per_rev} pulses/rev"
          + (f" with {run.missing_pulses} missing" if run.missing_pulses else ""))
    return 0


def cmd_track(args) -> int:
    """Track a recorded run in the angle domain and print (and optionally write) the results."""
    from workbench.cli.main import emit_json
    from workbench.cli.options import settings_from_args
    from workbench.runs.analysis import track_channels, vibration_channels
    from workbench.runs.files import read_run

    from workbench.cli.display_options import (analysis_options_from_args,
                                               display_options_from_args, scaling_from_args)
    from workbench.runs.analysis import MultiRunAnalysis
    from workbench.runs.scaled import rolloff_corrected, scaled_analysis

    out = Path(args.out) if args.out else None
    scaling = scaling_from_args(args)  # checked before the work
    plan = _read_limits_plan(getattr(args, "plan", None))   # its limits and its filter
    aa_filter = None if plan is None else plan.filter
    if getattr(args, "correct_rolloff", False) and aa_filter is None:
        raise InputError("--correct-rolloff: give the acquisition's plan with --plan PLAN (its filter's "
                         "roll-off is what is taken out)")
    # The frequency map is only drawn into --out: without it, it is not computed.
    settings, other = settings_from_args(args, protect=not args.no_protect, max_order=args.max_order,
                                         rf_map=out is not None, aa_filter=aa_filter,
                                         **analysis_options_from_args(args))
    opts = {**settings.speed_options, **other}
    run = read_run(args.run, rate_hz=other.get("rate_hz"))
    rows = vibration_channels(run, other.get("channels"), tacho=settings.tacho,
                              speed_channel=settings.speed_channel)
    folders = {}
    if out is not None:
        folders = channel_folders(out, [run.channels[i].name for i in rows])
        for folder in folders.values():
            _check_out_folder(folder, force=args.force)
    multi = track_channels(run, channels=tuple(i + 1 for i in rows), machine=args.machine,
                           plan=plan, settings=settings)
    chans = []
    for a in multi.channels:
        if getattr(args, "correct_rolloff", False):
            a = rolloff_corrected(a, aa_filter)
        chans.append(scaled_analysis(a, scaling))
    multi = MultiRunAnalysis(tuple(chans), threads=multi.threads)
    files = []
    if out is not None:
        for a in multi.channels:
            files.extend(write_track_outputs(a, folders[a.channel], force=args.force,
                                             **display_options_from_args(args)))
    from workbench.runs.tacho_checks import warn_tacho

    warn_tacho(args.run, multi.channels[0], opts, plan=plan)
    result = multi.channels[0].to_dict() if len(multi) == 1 else multi.to_dict()
    limits = None
    if plan is not None:   # judged on every channel tracked
        limits = [r for a in multi.channels for r in _judge_limits(a, plan)]
        result["limits"] = [r.to_dict() for r in limits]
    if files:
        result["files"] = [str(f) for f in files]
    if args.json:
        emit_json(result)
        return 0
    if len(multi) == 1:
        _print_track(multi.channels[0], files)
    else:
        _print_track_channels(multi, files)
    _print_limits(limits)
    return 0


def channel_folders(out: Path, names) -> dict:
    """Output folder of each channel: ``out`` itself for one channel; for several, one
    sub-folder per channel named after it (characters other than letters, digits, ``.``,
    ``-`` and ``_`` become ``_``; ``ch<N>_`` is put in front where two names would clash)."""
    import re

    names = list(names)
    if len(names) == 1:
        return {names[0]: out}
    safe = [re.sub(r"[^A-Za-z0-9._-]", "_", n).strip(".") or "channel" for n in names]
    taken = [s.lower() for s in safe]
    folders = {}
    for i, (n, f) in enumerate(zip(names, safe)):
        if taken.count(f.lower()) > 1:
            f = f"ch{i + 1}_{f}"
        folders[n] = out / f
    return folders


def _read_limits_plan(path):
    """The plan whose ``[[limit]]`` entries ``--plan`` asks to judge (None without it)."""
    if path is None:
        return None
    from workbench.sampling import read_plan

    return read_plan(path)


def _judge_limits(analysis, plan):
    """The plan's limits judged on the tracked run (None without a plan)."""
    if plan is None:
        return None
    from workbench.runs.limits import evaluate_limits

    if analysis.lines:
        plan.check_against(analysis.lines)
    return evaluate_limits(analysis, plan.limits, bands=plan.bands)


def _print_limits(limits) -> None:
    if limits is None:
        return
    from workbench.runs.limits import LIMITS_NOTE, limits_verdict

    if not limits:
        print("\nthe plan has no [[limit]] entries: nothing to judge")
        return
    print(f"\nacceptance limits: {limits_verdict(limits)}")
    for r in limits:
        print(f"  {r.describe()}")
    print(LIMITS_NOTE)


TRACK_FILES = (
    "order_spectrum.csv", "peaks.csv", "envelope_peaks.csv", "order_cuts.csv", "identification.csv",
    "unmatched.csv", "overall_level.csv", "overall_level.png", "order_map.npz", "order_map.parquet",
    "frequency_map.npz", "frequency_map.parquet", "order_waterfall.png",
    "doubted_pulses.csv", "tacho_check.png", "order_spectrum.png", "order_map.png", "order_cuts.png",
    "frequency_map.png",
)


def _check_out_folder(out: Path, *, force: bool) -> None:
    """Refuse before any work when an output of ``foldline track`` would be replaced."""
    from workbench.errors import OutputExistsError

    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    if not force:
        clash = [name for name in TRACK_FILES if (out / name).exists()]
        if clash:
            raise OutputExistsError(f"{out / clash[0]}: exists already; pass --force to replace the outputs in {out}")


def write_track_outputs(analysis, out: Path, *, force: bool = False, overlay: str = "none") -> list:
    """Write the tables (CSV) and figures (PNG) of a tracked run into folder ``out``.

    ``overlay`` (``"none"``, ``"matched"``, ``"all"``) chooses the predicted lines drawn over
    the maps and the order spectrum.
    """
    import numpy as np
    import pandas as pd

    from workbench.plots import (plot_order_cuts, plot_order_map, plot_order_spectrum, plot_frequency_map,
                                 plot_tacho_check, save_figure)

    out.mkdir(parents=True, exist_ok=True)
    files = []

    def table(frame, name):
        path = out / name
        _write_csv(frame, path, force=force)
        files.append(path)

    def figure(fig, name):
        path = out / name
        save_figure(fig, path, force=force)
        files.append(path)

    a = analysis
    table(pd.DataFrame({"order": a.spectrum.order, "amplitude": a.spectrum.amplitude}), "order_spectrum.csv")
    table(a.peaks, "peaks.csv")
    if a.envelope is not None:
        table(a.envelope_peaks, "envelope_peaks.csv")
    if a.cuts:
        table(pd.concat([pd.DataFrame({"order": c.order, "bandwidth_orders": c.bandwidth_orders, "rpm": c.rpm,
                                       "amplitude": c.amplitude}) for c in a.cuts], ignore_index=True),
              "order_cuts.csv")
    if a.identification is not None:
        table(a.identification.table, "identification.csv")
    if getattr(a, "unmatched", None) is not None:
        table(a.unmatched, "unmatched.csv")
    if getattr(a, "overall", None) is not None:
        table(pd.DataFrame({"rpm": a.overall.rpm, "rms": a.overall.rms, "blocks": a.overall.n_blocks}),
              "overall_level.csv")
    table(a.doubted, "doubted_pulses.csv")
    files.extend(_write_maps(a, out, force=force))
    sa = a.shaft_angle
    t = np.linspace(sa.t_start_s, sa.t_end_s, 2000)
    from workbench.plots import speed_check_options

    band = speed_check_options(sa, t, estimate=getattr(a, "speed_estimate", None), source=a.speed_source)
    figure(plot_tacho_check(t, sa.rpm_at(t), doubted_times_s=a.doubted["time_s"], doubted_reasons=a.doubted["reason"],
                            title=f"Tacho check: {Path(a.source).name} ({a.speed_source})", **band), "tacho_check.png")
    lines = a.lines or None  # the machine's lines the tracking identified with
    top = a.top_order
    sc = getattr(a, "scaling", None)  # amplitudes shown RMS, in dB or integrated
    label = None if sc is None else sc.label(a.channel_unit or "")
    db = sc is not None and sc.db_ref is not None
    shown = {"amplitude_label": label}
    valid = getattr(a, "valid", None)
    figure(plot_order_spectrum(a.spectrum, peaks=a.peaks, lines=lines, unit=a.unit, max_order=top,
                               overlay=overlay, identification=a.identification, valid=valid,
                               rpm_range=(a.rpm_min, a.rpm_max), log=not db, **shown,
                               title=f"Order spectrum: {Path(a.source).name}, channel {a.channel}"), "order_spectrum.png")
    figure(plot_order_map(a.order_map, lines=lines, rate_hz=a.rate_hz, identification=a.identification,
                          max_order=top, unit=a.unit, overlay=overlay, unmatched=getattr(a, "unmatched", None),
                          valid=valid, db=db, **shown,
                          title=f"Order map: {Path(a.source).name}"),
           "order_map.png")
    if a.cuts:
        figure(plot_order_cuts(a.cuts, unit=a.unit, valid=valid, log=not db, **shown), "order_cuts.png")
    if not db:
        from workbench.plots import plot_waterfall

        figure(plot_waterfall(a.order_map, unit=a.unit, max_axis=top, amplitude_label=label,
                              title=f"Order waterfall: {Path(a.source).name}"), "order_waterfall.png")
    if getattr(a, "overall", None) is not None:
        from workbench.plots import plot_overall_level

        figure(plot_overall_level(a.overall, unit=a.overall.unit or a.channel_unit or a.unit,
                                  cuts=None if sc else a.cuts,
                                  title=f"Overall level: {Path(a.source).name}, channel {a.channel}"),
               "overall_level.png")
    if a.rf_map is not None:
        figure(plot_frequency_map(a.rf_map, lines=lines, rate_hz=a.rate_hz, unit=a.unit, overlay=overlay,
                                      identification=a.identification, valid=valid, db=db, **shown,
                                      title=f"Frequency map (Campbell diagram): {Path(a.source).name}"),
               "frequency_map.png")
    return files


def _print_track_channels(multi, files) -> None:
    """Text output of several channels: the speed once, then each channel's strongest orders."""
    a = multi.first
    print(f"{a.source}: {len(multi)} channels, {a.rate_hz:g} S/s, speed from {a.speed_source}: "
          f"{a.rpm_min:.0f}-{a.rpm_max:.0f} rpm over {a.revolutions:.0f} rev")
    print(f"angle domain: {a.samples_per_rev} samples/rev, {a.revs_per_block:g} revs/block "
          f"(order resolution {1 / a.revs_per_block:g}), alias protection {'on' if a.protect else 'OFF'}")
    if len(a.doubted):
        print(f"doubted tacho pulses: {len(a.doubted)} (see doubted_pulses.csv)")
    for c in multi.channels:
        top = c.peaks.head(5)
        orders = ", ".join(f"{o:.4g} ({v:.3g})" for o, v in zip(top["order"], top["amplitude"]))
        print(f"\nchannel {c.channel}{' [' + c.unit + ']' if c.unit else ''}: strongest orders "
              f"(amplitude) {orders or 'none'}")
        if c.envelope is not None and len(c.envelope_peaks):
            ep = c.envelope_peaks.head(5)
            print("  envelope: " + ", ".join(f"{o:.4g} ({v:.3g})" for o, v in zip(ep["order"], ep["amplitude"])))
        if c.identification is not None and len(c.identification.aliases):
            names = list(dict.fromkeys(str(n) for n in c.identification.aliases["line"]))
            print(f"  aliases (folded lines, not machine orders): {', '.join(names)}")
    if files:
        print(f"\noutputs written to one folder per channel under {Path(files[0]).parent.parent}")


def _write_maps(a, out: Path, *, force: bool) -> list:
    """The order map and the frequency map as data: NPZ, and Parquet when pyarrow is there."""
    import importlib.util
    import warnings as _w

    from workbench.runs.mapdata import map_data, write_map_npz, write_map_parquet

    sc = getattr(a, "scaling", None)
    how = "peak" if sc is None else sc.label(a.channel_unit or "")
    parquet = importlib.util.find_spec("pyarrow") is not None
    if not parquet:
        _w.warn("the maps are written as NPZ only: Parquet needs pyarrow (pip install 'foldline[batch]')",
                FoldlineWarning, stacklevel=2)
    written = []
    for obj, stem in ((a.order_map, "order_map"), (a.rf_map, "frequency_map")):
        if obj is None:
            continue
        d = map_data(obj, unit=a.unit, amplitude_scaling=how)
        written.append(write_map_npz(d, out / f"{stem}.npz", force=force))
        if parquet:
            written.append(write_map_parquet(d, out / f"{stem}.parquet", force=force))
    return written


def _print_track(a, files) -> None:
    print(f"{a.source}: channel {a.channel}, {a.rate_hz:g} S/s, speed from {a.speed_source}: "
          f"{a.rpm_min:.0f}-{a.rpm_max:.0f} rpm over {a.revolutions:.0f} rev")
    print(f"angle domain: {a.samples_per_rev} samples/rev, {a.revs_per_block:g} revs/block "
          f"(order resolution {1 / a.revs_per_block:g}), alias protection {'on' if a.protect else 'OFF'}")
    if len(a.doubted):
        print(f"doubted tacho pulses: {len(a.doubted)} (see doubted_pulses.csv)")
    print("\nstrongest orders (averaged over the run, peak amplitude"
          f"{', ' + a.unit if a.unit else ''}):")
    print(a.peaks[["order", "amplitude"]].to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    if a.envelope is not None:
        print(f"\nenvelope orders ({a.envelope_hz[0]:g}-{a.envelope_hz[1]:g} Hz band):")
        print(a.envelope_peaks[["order", "amplitude"]].to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    if a.identification is not None and len(a.identification.aliases):
        al = a.identification.aliases
        print(f"\nfolded lines identified in the order map (aliases, not machine orders): {len(al)}")
        print(al[["line", "zone", "rpm_min", "rpm_max", "amplitude_max"]].to_string(
            index=False, float_format=lambda v: f"{v:.4g}"))
    um = getattr(a, "unmatched", None)
    if um is not None and len(um):
        what = "match no predicted line" if a.identification is not None else "were measured (no machine file)"
        print(f"\nmeasured lines that {what}: {len(um)}")
        print(um[["id", "family", "order", "hz", "rpm_min", "rpm_max", "amplitude_max"]].head(20).to_string(
            index=False, float_format=lambda v: f"{v:.4g}", na_rep="-"))
    if files:
        print(f"\noutputs written to {Path(files[0]).parent}")


def add_verbs(verb) -> None:
    """Register the run, demo, report and batch verbs on the parser's sub-command factory."""
    p = verb("demo", "run the main job on the bundled demo scenario and write its outputs")
    p.add_argument("--out", default="out/demo", metavar="DIR", help="output folder (default out/demo)")
    p.add_argument("--machine", metavar="MACHINE", help="use this machine file instead of the demo's")
    p.add_argument("--plan", metavar="PLAN", help="use this plan file instead of the demo's")
    p.add_argument("--run", metavar="RUN", help="track this recorded run instead of the demo's")
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
    p.add_argument("--resonance-hz", type=float, metavar="HZ", help="structural resonance, Hz (default 700, the same at every rate)")
    p.add_argument("--pulses-per-rev", type=int, default=1, metavar="N", help="tacho tooth positions per rev")
    p.add_argument("--missing-pulses", type=int, default=0, metavar="M", help="missing teeth of the tacho wheel")
    p.add_argument("--tacho-rise-ms", type=float, metavar="MS",
                   help="rise time of each tacho edge, ms (default 4 samples; 0 gives ideal steps)")
    p.add_argument("--format", choices=("float32", "int16", "int24", "int32"), default="float32", help="WAV sample format")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.set_defaults(func=cmd_simulate)

    from workbench.cli.options import add_track_options

    p = verb("track", "order tracking of a recorded run: speed, order spectrum, peaks, maps, aliases")
    p.add_argument("run", metavar="RUN", help="run file (WAV, CSV, NPZ or MAT; a .json sidecar beside it)")
    add_track_options(p)
    from workbench.cli.display_options import add_display_options

    add_display_options(p)
    p.add_argument("--machine", metavar="MACHINE", help="machine file for the predicted lines (default: the sidecar's)")
    p.add_argument("--plan", metavar="PLAN", help="plan file of the acquisition: its acceptance limits "
                                                  "([[limit]]) are judged on the run, and its anti-alias filter "
                                                  "bounds the valid region of the results (default: Nyquist of "
                                                  "the run's rate)")
    p.add_argument("--max-order", type=float, metavar="ORDER", help="highest order kept (default samples_per_rev / 2.56)")
    p.add_argument("--no-protect", action="store_true", help="switch alias protection off (to show what it prevents)")
    p.add_argument("--out", metavar="DIR", help="write tables (CSV) and figures (PNG) into this folder "
                   "(one sub-folder per channel when several are tracked)")
    p.add_argument("--force", action="store_true", help="replace existing outputs in the folder")
    p.set_defaults(func=cmd_track)

    _add_report_and_batch(verb)


def _add_report_and_batch(verb) -> None:
    """``foldline report`` and ``foldline batch`` (defined with their layers)."""
    from workbench.batch.command import add_batch_verb
    from workbench.report.command import add_report_verb

    add_report_verb(verb)
    add_batch_verb(verb)

