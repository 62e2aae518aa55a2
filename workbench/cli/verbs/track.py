"""``foldline track``: order tracking of a recorded run (speed, order spectrum, peaks, maps,
aliases), its tables and figures, and the plan's acceptance limits judged on it."""

from __future__ import annotations

from pathlib import Path

from workbench.cli.output import channel_folders, check_out_folder, finish, print_frame, write_csv
from workbench.cli.verbs import add_verb
from workbench.errors import InputError

__all__ = ["register", "cmd_track", "write_track_outputs", "judge_limits", "print_limits",
           "print_track", "TRACK_FILES"]

#: Every file ``foldline track --out`` may write into a channel's folder.
TRACK_FILES = (
    "order_spectrum.csv", "peaks.csv", "envelope_peaks.csv", "order_cuts.csv", "identification.csv",
    "unmatched.csv", "overall_level.csv", "overall_level.png", "order_map.npz", "order_map.parquet",
    "frequency_map.npz", "frequency_map.parquet", "order_waterfall.png",
    "doubted_pulses.csv", "tacho_check.png", "order_spectrum.png", "order_map.png", "order_cuts.png",
    "frequency_map.png",
)


def cmd_track(args) -> int:
    """Track a recorded run in the angle domain and print (and optionally write) the results."""
    from workbench.cli.display_options import (analysis_options_from_args,
                                               display_options_from_args, scaling_from_args)
    from workbench.cli.options import settings_from_args
    from workbench.runs.analysis import MultiRunAnalysis, track_channels, vibration_channels
    from workbench.runs.files import read_run
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
            check_out_folder(folder, TRACK_FILES, force=args.force)
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
        limits = [r for a in multi.channels for r in judge_limits(a, plan)]
        result["limits"] = [r.to_dict() for r in limits]

    def show():
        if len(multi) == 1:
            print_track(multi.channels[0], files)
        else:
            _print_track_channels(multi, files)
        print_limits(limits)

    return finish(args, result, show, files)


def _read_limits_plan(path):
    """The plan whose ``[[limit]]`` entries ``--plan`` asks to judge (None without it)."""
    if path is None:
        return None
    from workbench.sampling import read_plan

    return read_plan(path)


def judge_limits(analysis, plan):
    """The plan's limits judged on the tracked run (None without a plan)."""
    if plan is None:
        return None
    from workbench.runs.limits import evaluate_limits

    if analysis.lines:
        plan.check_against(analysis.lines)
    return evaluate_limits(analysis, plan.limits, bands=plan.bands)


def print_limits(limits) -> None:
    """The verdict of the acceptance limits and one line per limit (nothing without a plan)."""
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


def write_track_outputs(analysis, out: Path, *, force: bool = False, overlay: str = "none") -> list:
    """Write the tables (CSV) and figures (PNG) of a tracked run into folder ``out``.

    ``overlay`` (``"none"``, ``"matched"``, ``"all"``) chooses the predicted lines drawn over
    the maps and the order spectrum.
    """
    import numpy as np
    import pandas as pd

    from workbench.runs.mapdata import write_map_files
    from workbench.plots import (plot_frequency_map, plot_order_cuts, plot_order_map,
                                 plot_order_spectrum, plot_tacho_check, save_figure)

    out.mkdir(parents=True, exist_ok=True)
    files = []

    def table(frame, name):
        files.append(write_csv(frame, out / name, force=force))

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
        table(a.overall.to_frame(), "overall_level.csv")
    table(a.doubted, "doubted_pulses.csv")
    files.extend(write_map_files(a, out, force=force))
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


def _print_run_header(a, what: str) -> None:
    """The lines every text output of a tracked run starts with: source, speed, settings and
    doubted pulses; ``what`` says which channel(s)."""
    print(f"{a.source}: {what}, {a.rate_hz:g} S/s, speed from {a.speed_source}: "
          f"{a.rpm_min:.0f}-{a.rpm_max:.0f} rpm over {a.revolutions:.0f} rev")
    print(f"angle domain: {a.samples_per_rev} samples/rev, {a.revs_per_block:g} revs/block "
          f"(order resolution {1 / a.revs_per_block:g}), alias protection {'on' if a.protect else 'OFF'}")
    if len(a.doubted):
        print(f"doubted tacho pulses: {len(a.doubted)} (see doubted_pulses.csv)")


def _print_track_channels(multi, files) -> None:
    """Text output of several channels: the speed once, then each channel's strongest orders."""
    _print_run_header(multi.first, f"{len(multi)} channels")
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


def print_track(a, files) -> None:
    """Text output of one tracked channel: speed, strongest orders, envelope, aliases and the
    measured lines no prediction matches."""
    _print_run_header(a, f"channel {a.channel}")
    print("\nstrongest orders (averaged over the run, peak amplitude"
          f"{', ' + a.unit if a.unit else ''}):")
    print_frame(a.peaks[["order", "amplitude"]])
    if a.envelope is not None:
        print(f"\nenvelope orders ({a.envelope_hz[0]:g}-{a.envelope_hz[1]:g} Hz band):")
        print_frame(a.envelope_peaks[["order", "amplitude"]])
    if a.identification is not None and len(a.identification.aliases):
        al = a.identification.aliases
        print(f"\nfolded lines identified in the order map (aliases, not machine orders): {len(al)}")
        print_frame(al[["line", "zone", "rpm_min", "rpm_max", "amplitude_max"]])
    um = getattr(a, "unmatched", None)
    if um is not None and len(um):
        what = "match no predicted line" if a.identification is not None else "were measured (no machine file)"
        print(f"\nmeasured lines that {what}: {len(um)}")
        print_frame(um[["id", "family", "order", "hz", "rpm_min", "rpm_max", "amplitude_max"]].head(20),
                    na_rep="-")
    if files:
        print(f"\noutputs written to {Path(files[0]).parent}")


def register(subparsers) -> None:
    """Add ``foldline track`` to the command."""
    from workbench.cli.display_options import add_display_options
    from workbench.cli.options import add_track_options

    p = add_verb(subparsers, "track", "order tracking of a recorded run: speed, order spectrum, peaks, maps, aliases")
    p.add_argument("run", metavar="RUN", help="run file (WAV, CSV, NPZ, MAT, MF4 or HDF5; a .json sidecar beside it)")
    add_track_options(p)
    add_display_options(p)
    p.add_argument("--machine", metavar="MACHINE", help="machine file for the predicted lines (default: the sidecar's)")
    p.add_argument("--plan", metavar="PLAN", help="plan file of the acquisition: its acceptance limits "
                                                  "([[limit]]) are judged on the run, and its anti-alias filter "
                                                  "bounds the valid region of the results (default: Nyquist of "
                                                  "the run's rate)")
    p.add_argument("--max-order", type=float, metavar="ORDER", help="highest order kept (default samples_per_rev / 2.56, the analyser factor)")
    p.add_argument("--no-protect", action="store_true", help="switch alias protection off (to show what it prevents)")
    p.add_argument("--out", metavar="DIR", help="write tables (CSV) and figures (PNG) into this folder "
                   "(one sub-folder per channel when several are tracked)")
    p.add_argument("--force", action="store_true", help="replace existing outputs in the folder")
    p.set_defaults(func=cmd_track)
