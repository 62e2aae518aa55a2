"""``foldline report``: one self-contained HTML report of a machine, a plan and optionally a run."""

from __future__ import annotations

import sys

from workbench.cli.output import finish
from workbench.cli.verbs import add_verb
from workbench.errors import InputError

__all__ = ["register", "cmd_report"]


def _stderr(msg: str) -> None:
    sys.stderr.write(msg + "\n")


def cmd_report(args) -> int:
    """Write one self-contained HTML report of a machine, a plan and optionally a run."""
    from workbench.cli.display_options import analysis_options_from_args, report_display_from_args
    from workbench.cli.options import option_name, track_options_from_args
    from workbench.report.document import write_report
    from workbench.runs.metadata import parse_meta_options

    meta = parse_meta_options(getattr(args, "meta", None))
    opts = {**track_options_from_args(args), **analysis_options_from_args(args)}
    if args.run is None and opts:
        raise InputError(f"tracking options ({', '.join(option_name(k) for k in opts)}) "
                         "need a RUN; give the run file after the plan")
    # Progress only for a person at a terminal: a script's stderr keeps the one-line error
    # contract (warnings go through the command's one-line handler).
    show_progress = not args.json and sys.stderr.isatty()
    report = write_report(args.machine, args.plan, args.run, out=args.out, force=args.force,
                          track_options=opts,
                          progress=(lambda t: _stderr(f"report: {t}")) if show_progress else None,
                          display=report_display_from_args(args), meta=meta)
    result = {"out": str(args.out), **report.to_dict()}

    def show():
        print(f"report written to {args.out} ({result['bytes'] / 1e6:.1f} MB, sha256 {report.sha256[:12]}...)")
        print(f"sections: {', '.join(report.sections)}")
        rec = report.recommended_rate_hz
        print(f"recommended rate: {rec:g} Hz" if rec is not None else
              "no rate recommended: none is both clean (no collision) and captures the highest order")
        if report.aliases is not None:
            print(f"aliases identified in the run: {', '.join(report.aliases) or 'none'}")
        if report.limits:
            from workbench.runs.limits import LIMITS_NOTE, limits_verdict

            print(f"acceptance limits: {limits_verdict(report.limits)}")
            print(LIMITS_NOTE)

    return finish(args, result, show)


def register(subparsers) -> None:
    """Add ``foldline report`` to the command."""
    from workbench.cli.display_options import add_display_options
    from workbench.cli.options import add_track_options

    p = add_verb(subparsers, "report", "one self-contained HTML report of a machine, a plan and optionally a run")
    p.add_argument("machine", metavar="MACHINE", help="machine file (TOML)")
    p.add_argument("plan", metavar="PLAN", help="plan file (TOML)")
    p.add_argument("run", metavar="RUN", nargs="?", help="recorded run to track and include")
    p.add_argument("--out", required=True, metavar="FILE.html", help="output HTML file")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.add_argument("--meta", action="append", metavar="KEY=VALUE",
                   help="test metadata to add or override (repeatable): unit_under_test, "
                        "serial_number, test_id, operator, date, or CHANNEL.position / "
                        ".direction / .sensor_type")
    add_track_options(p)
    add_display_options(p)
    p.set_defaults(func=cmd_report)
