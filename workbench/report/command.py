"""``foldline report``: the verb, the demo's report, and the tracking options shared with batch."""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

from workbench.errors import FoldlineWarning, InputError

__all__ = ["add_report_verb", "cmd_report", "add_track_options", "track_options_from_args",
           "demo_report", "parse_orders"]


def parse_orders(text: str, name: str) -> tuple:
    """``"1,29,4.95"`` -> (1.0, 29.0, 4.95); every order positive."""
    try:
        vals = tuple(float(v) for v in str(text).split(",") if v.strip())
    except ValueError:
        raise InputError(f"{name} {text!r}: give orders separated by commas, e.g. 1,29,4.95") from None
    bad = [v for v in vals if not (v > 0 and v < float("inf"))]
    if not vals or bad:
        raise InputError(f"{name} {text!r}: every order must be a positive number")
    return vals


def _band(text: str, name: str) -> tuple:
    try:
        lo, hi = (float(v) for v in str(text).split(","))
    except ValueError:
        raise InputError(f"{name} {text!r}: give a band in Hz as LO,HI, e.g. 400,1000") from None
    if not (0 <= lo < hi):
        raise InputError(f"{name} {text!r}: need 0 <= LO < HI (Hz)")
    return lo, hi


def add_track_options(p) -> None:
    """The options that say how a run is tracked (same meaning as ``foldline track``)."""
    g = p.add_argument_group("tracking")
    g.add_argument("--channel", metavar="CH", help="vibration channel: 1-based index or name")
    g.add_argument("--tacho", metavar="CH", help="tacho channel: 1-based index or name")
    g.add_argument("--pulses-per-rev", type=int, metavar="N",
                   help="tacho tooth positions per rev, missing ones included")
    g.add_argument("--missing-pulses", type=int, metavar="M", help="missing teeth of the tacho wheel")
    speed = g.add_mutually_exclusive_group()
    speed.add_argument("--rpm", type=float, metavar="RPM", help="constant speed in place of a tacho")
    speed.add_argument("--speed-table", metavar="CSV", help="CSV time_s,rpm in place of a tacho")
    g.add_argument("--rate", type=float, metavar="HZ", help="sample rate where the file has none")
    g.add_argument("--samples-per-rev", type=int, metavar="N", help="angle-domain samples per rev")
    g.add_argument("--revs-per-block", type=float, metavar="N", help="revolutions per FFT block")
    g.add_argument("--envelope", metavar="LO,HI", help="envelope order spectrum of this band, Hz")
    g.add_argument("--cut-orders", metavar="O1,O2", help="orders to cut against speed")
    g.add_argument("--cut-bandwidth", type=float, metavar="ORDERS", help="width of each order cut")


def track_options_from_args(args) -> dict:
    """``track_run`` keyword options from the parsed tracking options (None left out)."""
    opts = {
        "channel": _channel(args.channel),
        "tacho": _channel(args.tacho),
        "pulses_per_rev": args.pulses_per_rev,
        "missing_pulses": args.missing_pulses,
        "rpm": args.rpm,
        "speed_table": args.speed_table,
        "rate_hz": args.rate,
        "samples_per_rev": args.samples_per_rev,
        "revs_per_block": args.revs_per_block,
        "envelope_hz": None if args.envelope is None else _band(args.envelope, "--envelope"),
        "cut_orders": None if args.cut_orders is None else parse_orders(args.cut_orders, "--cut-orders"),
        "cut_bandwidth_orders": args.cut_bandwidth,
    }
    return {k: v for k, v in opts.items() if v is not None}


def _channel(text):
    """A channel as given: a 1-based index (digits) becomes an int, a name stays text."""
    if text is None:
        return None
    s = str(text).strip()
    return int(s) if s.isdigit() else s


def _stderr(msg: str) -> None:
    sys.stderr.write(msg + "\n")


def cmd_report(args) -> int:
    """Write one self-contained HTML report of a machine, a plan and optionally a run."""
    from workbench.cli.main import emit_json
    from workbench.report.document import write_report

    opts = track_options_from_args(args)
    if args.run is None and opts:
        raise InputError(f"tracking options ({', '.join('--' + k.replace('_', '-') for k in opts)}) "
                         "need a RUN; give the run file after the plan")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FoldlineWarning)
        report = write_report(args.machine, args.plan, args.run, out=args.out, force=args.force,
                              track_options=opts,
                              progress=None if args.json else (lambda t: _stderr(f"report: {t}")))
    for w in caught:
        _stderr(f"warning: {w.message}")
    result = {"out": str(args.out), **report.to_dict()}
    if args.json:
        emit_json(result)
        return 0
    print(f"report written to {args.out} ({result['bytes'] / 1e6:.1f} MB, sha256 {report.sha256[:12]}...)")
    print(f"sections: {', '.join(report.sections)}")
    rec = report.recommended_rate_hz
    print(f"recommended rate: {rec:g} Hz" if rec is not None else "no clean rate found")
    if report.aliases is not None:
        print(f"aliases identified in the run: {', '.join(report.aliases) or 'none'}")
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
    add_track_options(p)
    p.set_defaults(func=cmd_report)
