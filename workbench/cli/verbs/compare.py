"""``foldline compare``: order cuts, order spectra and overall levels of two or more runs,
aligned on speed (run-up against coast-down, before against after)."""

from __future__ import annotations

import warnings
from pathlib import Path

from workbench.cli.output import check_out_folder, finish, print_frame, write_csv
from workbench.cli.verbs import add_verb
from workbench.errors import FoldlineWarning, InputError

__all__ = ["register", "cmd_compare", "COMPARE_FILES"]

COMPARE_FILES = ("compare_cuts.csv", "compare_overall.csv", "compare_spectra.csv", "compare_changes.csv",
                 "compare_cuts.png", "compare_overall.png", "compare_spectra.png")


def cmd_compare(args) -> int:
    """Track every run with the same settings and compare them on a common speed grid."""
    import pandas as pd

    from workbench.cli.options import track_options_from_args
    from workbench.runs.analysis import track_run
    from workbench.runs.compare import compare_runs

    if len(args.runs) < 2:
        raise InputError("compare: give at least two runs (RUN RUN [RUN ...])")
    labels = None
    if args.labels is not None:
        labels = [v.strip() for v in args.labels.split(",")]
        if len(labels) != len(args.runs):
            raise InputError(f"--labels {args.labels!r}: give {len(args.runs)} labels, one per run, "
                             "separated by commas")
    out = Path(args.out) if args.out else None
    if out is not None:
        check_out_folder(out, COMPARE_FILES, force=args.force)
    opts = track_options_from_args(args)
    analyses = []
    for path in args.runs:
        a = track_run(path, machine=args.machine, rf_map=False, **opts)
        analyses.append(a)
        if "cut_orders" not in opts:  # every run is cut at the first run's orders
            opts["cut_orders"] = tuple(float(c.order) for c in a.cuts)
    comp = compare_runs(analyses, labels=labels)
    for note in comp.notes:
        warnings.warn(note, FoldlineWarning, stacklevel=2)
    files = []
    if out is not None:
        from workbench.plots.common import save_figure
        from workbench.plots.compare import plot_compare_cuts, plot_compare_overall, plot_compare_spectra

        out.mkdir(parents=True, exist_ok=True)

        def table(frame, name):
            files.append(write_csv(frame, out / name, force=args.force))

        rows = []
        for o, a in comp.cuts.items():
            for i, lab in enumerate(comp.labels):
                rows.append(pd.DataFrame({"order": o, "label": lab, "rpm": comp.rpm, "amplitude": a[i]}))
        table(pd.concat(rows, ignore_index=True), "compare_cuts.csv")
        if comp.overall is not None:
            table(pd.DataFrame({"rpm": comp.rpm, **{lab: comp.overall[i] for i, lab in enumerate(comp.labels)}}),
                  "compare_overall.csv")
        table(pd.DataFrame({"order": comp.order, **{lab: comp.spectra[i] for i, lab in enumerate(comp.labels)}}),
              "compare_spectra.csv")
        table(comp.changes(), "compare_changes.csv")
        top = analyses[0].top_order
        for fig, name in ((plot_compare_cuts(comp), "compare_cuts.png"),
                          (plot_compare_overall(comp), "compare_overall.png"),
                          (plot_compare_spectra(comp, max_order=top), "compare_spectra.png")):
            save_figure(fig, out / name, force=args.force)
            files.append(out / name)

    def show():
        print("runs compared on a common speed grid "
              f"({comp.rpm[0]:.0f}-{comp.rpm[-1]:.0f} rpm, {len(comp.rpm)} points):")
        print_frame(comp.runs, digits=".0f")
        ch = comp.changes()
        if len(ch):
            print("\nlargest change of each order cut against the first run (dB):")
            print_frame(ch, digits=".1f")
        if files:
            print(f"\noutputs written to {out}")

    return finish(args, comp.to_dict(), show, files)


def register(subparsers) -> None:
    """Add ``foldline compare`` to the command."""
    from workbench.cli.options import add_track_options

    p = add_verb(subparsers, "compare", "order cuts, order spectra and overall levels of two or more runs, aligned on speed")
    p.add_argument("runs", nargs="+", metavar="RUN", help="two or more runs of the same machine")
    add_track_options(p)
    p.add_argument("--machine", metavar="MACHINE", help="machine file (default: each run's sidecar's)")
    p.add_argument("--labels", metavar="A,B", help="one label per run (default: the file names)")
    p.add_argument("--out", metavar="DIR", help="write the aligned tables (CSV) and figures (PNG) into this folder")
    p.add_argument("--force", action="store_true", help="replace existing outputs in the folder")
    p.set_defaults(func=cmd_compare)
