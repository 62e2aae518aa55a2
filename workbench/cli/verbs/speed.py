"""``foldline speed``: the reference shaft's speed of a run, from the tacho, the vibration or a
speed channel, with its uncertainty; optionally written as a speed table (CSV ``time_s,rpm``)
that ``--speed-table`` reads back."""

from __future__ import annotations

import math
import warnings

from workbench.cli.output import finish, thin
from workbench.cli.verbs import add_verb
from workbench.errors import FoldlineWarning

__all__ = ["register", "cmd_speed", "speed_result", "write_speed_table"]

def speed_result(run, *, tacho=None, pulses_per_rev=None, missing_pulses=None,
                 speed_order=None, speed_range=None, speed_channel=None, speed_scale=None,
                 channel=None, speed_tolerance=None) -> dict:
    """The speed of a run as the verb reports it (every estimate, not thinned).

    Returns
    -------
    dict
        ``speed_source`` ("tacho", "vibration" or "channel"), ``time_s`` and ``rpm`` (ndarrays:
        the tacho's pulse times and the speed there, or the estimate's time grid),
        ``uncertainty_pct`` (RMS relative uncertainty over the record, %, or None when not
        known), ``method`` (one line), ``warnings`` (list of str) and ``angle`` (ShaftAngle).
    """
    import numpy as np

    from workbench.runs.analysis import run_speed, run_speed_estimate

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FoldlineWarning)
        est = run_speed_estimate(run, speed_order=speed_order, speed_range=speed_range,
                                 speed_channel=speed_channel, speed_scale=speed_scale,
                                 channel=channel, tacho=tacho, pulses_per_rev=pulses_per_rev,
                                 missing_pulses=missing_pulses)
        if est is not None:
            angle, source = est.angle, est.source
            t, rpm = est.time_s, est.rpm
            unc = 100.0 * est.speed_uncertainty
            method = est.method
        else:
            angle, source = run_speed(run, tacho=tacho, pulses_per_rev=pulses_per_rev,
                                      missing_pulses=missing_pulses,
                                      speed_tolerance=speed_tolerance)
            t = np.asarray(angle.pulse_times_s)
            rpm = np.asarray(angle.rpm_at(t))
            timing = getattr(angle, "timing", None)
            u = None if timing is None else getattr(timing, "speed_uncertainty", None)
            unc = 100.0 * float(u) if u is not None and math.isfinite(float(u)) else None
            method = "tacho pulses" + ("" if timing is None else f"; {timing.describe()}")
    msgs = [" ".join(str(w.message).split()) for w in caught
            if issubclass(w.category, FoldlineWarning)]
    for w in caught:  # through the command's one-line handler, once
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return {"speed_source": source, "time_s": np.asarray(t, dtype=float),
            "rpm": np.asarray(rpm, dtype=float), "uncertainty_pct": unc, "method": method,
            "warnings": msgs, "angle": angle}


def write_speed_table(path, time_s, rpm, *, force: bool = False) -> None:
    """Write a speed table (CSV ``time_s,rpm``, every row) under a temporary name, then rename."""
    import numpy as np

    from workbench.fileio import atomic_output

    table = np.column_stack([np.asarray(time_s, dtype=float), np.asarray(rpm, dtype=float)])
    with atomic_output(path, force=force) as tmp:
        np.savetxt(tmp, table, fmt="%.17g", delimiter=",", header="time_s,rpm", comments="")


def cmd_speed(args) -> int:
    """Speed of a run from the tacho, an order of the vibration or a speed channel."""
    from workbench.cli.options import _channel, _percent, speed_options_from_args
    from workbench.fileio import check_writable
    from workbench.runs import read_run

    opts = speed_options_from_args(args)
    if args.out:  # refuse an existing output before the work, not after
        check_writable(args.out, force=args.force)
    run = read_run(args.run, rate_hz=args.rate)
    res = speed_result(run, tacho=_channel(args.tacho), pulses_per_rev=args.pulses_per_rev,
                       missing_pulses=args.missing_pulses, channel=_channel(args.channel),
                       speed_tolerance=_percent(args.speed_tolerance, "--speed-tolerance"),
                       **opts)
    if args.out:
        write_speed_table(args.out, res["time_s"], res["rpm"], force=args.force)
    keep = thin(len(res["time_s"]))
    out = {
        "speed_source": res["speed_source"],
        "time_s": res["time_s"][keep],
        "rpm": res["rpm"][keep],
        "uncertainty_pct": res["uncertainty_pct"],
        "warnings": res["warnings"],
        "points": int(len(res["time_s"])),
        "method": res["method"],
    }
    if args.out:
        out["out"] = str(args.out)

    def show():
        unc = res["uncertainty_pct"]
        rpm = res["rpm"]
        print(f"{run.source}: speed from the {res['speed_source']}: {rpm.min():.1f} to "
              f"{rpm.max():.1f} rpm over {res['time_s'][0]:.3f}-{res['time_s'][-1]:.3f} s, "
              f"{len(rpm)} estimates")
        print(f"method: {res['method']}")
        print("uncertainty: " + ("not known" if unc is None else f"{unc:.3g} % RMS"))
        if args.out:
            print(f"speed table written to {args.out} (read back with --speed-table)")

    return finish(args, out, show)


def register(subparsers) -> None:
    """Add ``foldline speed`` to the command."""
    from workbench.cli.options import add_speed_options

    p = add_verb(subparsers, "speed", "speed of a run from the tacho, an order of the vibration "
                                      "or a speed channel, with its uncertainty")
    p.add_argument("run", metavar="RUN", help="run file (WAV, CSV, NPZ or MAT; a .json sidecar "
                                              "beside it)")
    g = p.add_argument_group("speed source (default: the tacho named in the sidecar)")
    source = g.add_mutually_exclusive_group()
    source.add_argument("--tacho", metavar="CH", help="tacho channel: 1-based index or name")
    g.add_argument("--pulses-per-rev", type=int, metavar="N",
                   help="tacho tooth positions per rev, missing ones included")
    g.add_argument("--missing-pulses", type=int, metavar="M",
                   help="missing teeth of the tacho wheel")
    add_speed_options(g, source)
    g.add_argument("--speed-tolerance", type=float, metavar="PCT",
                   help="RMS speed uncertainty (percent) the tacho stage aims at and warns "
                        "beyond (default 0.0078, from order 100 and 16 revs per block)")
    g.add_argument("--channel", metavar="CH",
                   help="vibration channel --speed-order follows (default: the first that is "
                        "not the tacho)")
    p.add_argument("--rate", type=float, metavar="HZ", help="sample rate where the file has none")
    p.add_argument("--out", metavar="CSV", help="write every estimate as a speed table "
                                                "(time_s,rpm)")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.set_defaults(func=cmd_speed)
