"""``foldline report``: the verb and the demo's report."""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

from workbench.errors import FoldlineWarning, InputError

from workbench.cli.options import add_track_options, option_name, track_options_from_args

__all__ = ["add_report_verb", "cmd_report", "demo_report"]


def _stderr(msg: str) -> None:
    sys.stderr.write(msg + "\n")


def cmd_report(args) -> int:
    """Write one self-contained HTML report of a machine, a plan and optionally a run."""
    from workbench.cli.main import emit_json
    from workbench.report.document import write_report
    from workbench.runs.metadata import parse_meta_options

    from workbench.cli.display_options import analysis_options_from_args

    meta = parse_meta_options(getattr(args, "meta", None))
    opts = {**track_options_from_args(args), **analysis_options_from_args(args)}
    if args.run is None and opts:
        raise InputError(f"tracking options ({', '.join(option_name(k) for k in opts)}) "
                         "need a RUN; give the run file after the plan")
    # Progress only for a person at a terminal: a script's stderr keeps the one-line error
    # contract (warnings go through the command's one-line handler).
    show = not args.json and sys.stderr.isatty()
    from workbench.cli.display_options import report_display_from_args

    report = write_report(args.machine, args.plan, args.run, out=args.out, force=args.force,
                          track_options=opts, progress=(lambda t: _stderr(f"report: {t}")) if show else None,
                          display=report_display_from_args(args), meta=meta)
    result = {"out": str(args.out), **report.to_dict()}
    if args.json:
        emit_json(result)
        return 0
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
    return 0


def demo_report(machine_path, plan_path, run_path, out_dir, *, analysis=None, force=False) -> Path:
    """Write the demo's report (``report.html`` in ``out_dir``) and return its path.

    ``analysis`` is the run already tracked by the demo (reused, not tracked again).
    """
    from workbench.report.document import write_report

    out = Path(out_dir) / "report.html"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        write_report(machine_path, plan_path, run_path, out=out, force=force, analysis=analysis)
    return out


def add_report_verb(verb) -> None:
    """Register ``foldline report`` on the parser's sub-command factory."""
    p = verb("report", "one self-contained HTML report of a machine, a plan and optionally a run")
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
    from workbench.cli.display_options import add_display_options

    add_display_options(p)
    p.set_defaults(func=cmd_report)
