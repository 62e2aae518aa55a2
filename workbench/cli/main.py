"""The ``foldline`` command.

Every verb takes ``--json`` and then prints exactly one JSON object on stdout.  Exit status 0 on
success; 2 with a single line ``foldline: error: ...`` on stderr for bad input (no traceback);
outputs are written to a temporary name and renamed into place, so a failure leaves no partial
file.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import warnings
from pathlib import Path

from workbench import __version__
from workbench.errors import FoldlineError, FoldlineWarning, InputError

__all__ = ["main", "build_parser"]

PROG = "foldline"


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage error is one line and exit status 2."""

    def error(self, message):  # noqa: D401 - argparse API
        raise _UsageError(f"{message} (see '{self.prog} --help')")


class _UsageError(Exception):
    pass


def _jsonable(obj):
    """Convert numpy scalars, NaN/inf and tuples for ``json.dumps``."""
    import numpy as np   # here, not at the top: ``foldline --help`` should not load it

    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def emit_json(obj) -> None:
    """Print one JSON object on stdout."""
    sys.stdout.write(json.dumps(_jsonable(obj), allow_nan=False) + "\n")


def _positive(value, name):
    v = float(value)
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"{name} = {value!r}: must be a positive number")
    return v


# --------------------------------------------------------------------------------------------
# verbs


def cmd_alias(args) -> int:
    import numpy as np

    from workbench.sampling.folding import apparent_frequency, nyquist_zone

    rate = _positive(args.rate, "--rate")
    from workbench.sampling.guards import warn_implausible_rate

    warn_implausible_rate(rate, name="--rate")
    freqs = np.array(args.frequencies, dtype=float)
    if not np.all(np.isfinite(freqs)) or np.any(freqs < 0):
        bad = [f for f in args.frequencies if not (math.isfinite(f) and f >= 0)]
        raise InputError(f"frequency {bad[0]!r}: frequencies must be finite and >= 0 Hz")
    if args.plan:
        from workbench.sampling.plan import read_plan

        plan = read_plan(args.plan)
        att = np.asarray(plan.filter.attenuation_db(freqs, rate), dtype=float)
        label = plan.filter.describe()
    else:
        att = np.zeros_like(freqs)
        label = "none"
    app = apparent_frequency(freqs, rate)
    zone = nyquist_zone(freqs, rate)
    out = {
        "rate_hz": rate,
        "nyquist_hz": rate / 2.0,
        "filter": label,
        "lines": [
            {"hz": float(f), "apparent_hz": float(a), "zone": int(z), "attenuation_db": float(d)}
            for f, a, z, d in zip(freqs, app, zone, att)
        ],
    }
    if args.json:
        emit_json(out)
        return 0
    print(f"rate {rate:g} Hz, Nyquist {rate / 2:g} Hz, filter: {label}")
    head = ("hz", "apparent_hz", "zone", "attenuation_db", "folded")
    rows = [(f"{r['hz']:.2f}", f"{r['apparent_hz']:.2f}", str(r["zone"]),
             f"{r['attenuation_db']:.2f}", str(r["zone"] >= 1)) for r in out["lines"]]
    width = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
    print(" ".join(h.rjust(w) for h, w in zip(head, width)))
    for r in rows:
        print(" ".join(v.rjust(w) for v, w in zip(r, width)))
    return 0


def cmd_orders(args) -> int:
    from workbench.machine import read_machine

    machine = read_machine(args.machine)
    rows = [
        {
            "name": ln.name,
            "entry": ln.entry,
            "kind": ln.kind,
            "harmonic": int(ln.harmonic),
            "order": None if ln.order is None else float(ln.order),
            "hz": None if ln.hz is None else float(ln.hz),
        }
        for ln in machine.lines()
    ]
    out = {"reference": machine.reference, "sources": rows}
    if args.json:
        emit_json(out)
        return 0
    import pandas as pd

    print(f"{machine.name}: orders of the reference shaft '{machine.reference}'")
    table = pd.DataFrame(rows)
    table["order"] = table["order"].map(lambda v: "" if v is None or v != v else f"{v:.4f}")
    table["hz"] = table["hz"].map(lambda v: "" if v is None or v != v else f"{v:.2f}")
    print(table.to_string(index=False))
    return 0


def _collision_records(table):
    from workbench.sampling import COLLISION_COLUMNS

    recs = []
    for row in table.itertuples(index=False):
        recs.append({k: getattr(row, k) for k in COLLISION_COLUMNS})
    return recs


def cmd_foldmap(args) -> int:
    from workbench.machine import read_machine
    from workbench.sampling import find_collisions, fold_map, read_plan

    machine = read_machine(args.machine)
    plan = read_plan(args.plan)
    plan.check_against(machine.lines())
    rate = _positive(args.rate, "--rate")
    if args.png:  # refuse an existing figure (or a missing folder) before the work, not after
        from workbench.runs import check_writable

        check_writable(args.png, force=args.force)
    fmap = fold_map(machine, plan, rate)
    table = find_collisions(machine, plan, rate, fmap=fmap)
    if args.png:
        from workbench.plots import save_figure, plot_fold_map

        fig = plot_fold_map(fmap, plan, collisions=table, view=args.view,
                            log_frequency=getattr(args, "log_frequency", False))
        save_figure(fig, args.png, force=args.force)
    coll = table[table["kind"] == "collision"]
    over = table[table["kind"] == "overlap"]
    out = {
        "rate_hz": rate,
        "filter": plan.filter.describe(),
        "threshold_db": plan.threshold_db,
        "collisions": _collision_records(coll),
        "overlaps": _collision_records(over),
    }
    if args.json:
        emit_json(out)
        return 0
    print(f"{machine.name} at {rate:g} Hz ({plan.filter.describe()}), threshold {plan.threshold_db:g} dB")
    _print_table("collisions (folded lines inside a band)", coll)
    _print_table("overlaps (direct lines inside a band)", over)
    if args.png:
        print(f"fold map written to {args.png}")
    return 0


def _print_table(title, table):
    from workbench.sampling import COLLISION_COLUMNS

    print(f"\n{title}: {len(table)}")
    if len(table):
        print(table[list(COLLISION_COLUMNS)].to_string(index=False, float_format=lambda v: f"{v:.1f}"))


def cmd_plan(args) -> int:
    from workbench.machine import read_machine
    from workbench.sampling import advise, read_plan

    machine = read_machine(args.machine)
    plan = read_plan(args.plan)
    advice = advise(machine, plan)  # warnings go to stderr through main()'s handler
    if args.json:
        emit_json(advice.to_dict())
        return 0
    _print_advice(machine, plan, advice)
    return 0


def _print_advice(machine, plan, advice):
    cand = advice.candidates.copy()
    print(f"{machine.name}: {plan.speed.rpm_min:g}-{plan.speed.rpm_max:g} rpm, filter {plan.filter.describe()}")
    print(cand.to_string(index=False, float_format=lambda v: f"{v:.1f}"))
    rec = advice.recommended_rate_hz
    print(f"\nrecommended rate: {rec:g} Hz" if rec is not None else
          "\nno rate recommended: none is both clean (no collision) and captures the highest order")
    rs = advice.resampling
    print(
        f"angle domain: {rs.samples_per_rev} samples/rev (max order {rs.max_order:g}), "
        f"{rs.revs_per_block} revs/block (order resolution {rs.order_resolution:g}), "
        f"lowest rate capturing order {rs.max_order:g} at {rs.top_speed_rpm:g} rpm: {rs.min_rate_hz:.0f} Hz"
    )
    print(
        f"a plain time-domain FFT would smear order {rs.max_order:g} over {rs.smearing_bins:.1f} bins "
        f"({rs.smearing_hz:.1f} Hz) per block at the fastest sweep"
    )
    for note in advice.notes:
        print(f"  - {note}")
    crossings = getattr(advice, "crossings", None)
    if crossings is not None and len(crossings):
        cols = ["line", "resonance", "rpm", "time_s", "sweep_rpm_per_s", "peak_loss_db", "sweep_ok",
                "slowest_sweep_rpm_per_s"]
        print(f"\ncrossings of lines with resonances and criticals: {len(crossings)}")
        fmt = {"rpm": "{:.0f}".format, "time_s": "{:.1f}".format, "sweep_rpm_per_s": "{:.3g}".format,
               "peak_loss_db": "{:.2f}".format, "slowest_sweep_rpm_per_s": "{:.3g}".format}
        print(crossings[cols].to_string(index=False, formatters=fmt))


# --------------------------------------------------------------------------------------------
# parser


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``foldline`` command (all verbs)."""
    parser = _Parser(
        prog=PROG,
        description="Plan run-up tests, predict aliasing of machine orders, track runs in the angle domain.",
        epilog="Safety: foldline plans acquisition and analysis only. Follow the machine maker's "
        "limits, site procedures and local codes for any run-up or coast-down.",
    )
    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    sub = parser.add_subparsers(dest="verb", metavar="VERB", parser_class=_Parser)
    sub.required = True

    def verb(name, help_text):
        p = sub.add_parser(name, help=help_text, description=help_text)
        p.add_argument("--json", action="store_true", help="print one JSON object on stdout")
        return p

    p = verb("alias", "apparent frequency and Nyquist zone of frequencies sampled at a rate")
    p.add_argument("frequencies", nargs="+", type=float, metavar="F", help="true frequencies, Hz")
    p.add_argument("--rate", required=True, type=float, metavar="HZ", help="sample rate, Hz")
    p.add_argument("--plan", metavar="PLAN", help="plan file whose anti-alias filter gives the attenuation")
    p.set_defaults(func=cmd_alias)

    p = verb("orders", "every line of a machine file, in orders of the reference shaft or in Hz")
    p.add_argument("machine", metavar="MACHINE", help="machine file (TOML)")
    p.set_defaults(func=cmd_orders)

    p = verb("foldmap", "fold map, collisions and overlaps of a machine under a plan at one rate")
    p.add_argument("machine", metavar="MACHINE")
    p.add_argument("plan", metavar="PLAN")
    p.add_argument("--rate", required=True, type=float, metavar="HZ")
    p.add_argument("--png", metavar="FILE", help="write the fold map figure to FILE")
    p.add_argument("--view", choices=("hz", "order"), default="hz", help="frequency axis of the figure")
    p.add_argument("--log-frequency", action="store_true",
                   help="logarithmic frequency (or order) axis: spreads the low-frequency region")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.set_defaults(func=cmd_foldmap)

    p = verb("plan", "judge the plan's candidate rates and recommend rate and angle-domain settings")
    p.add_argument("machine", metavar="MACHINE")
    p.add_argument("plan", metavar="PLAN")
    p.set_defaults(func=cmd_plan)

    from workbench.cli import verbs_runs

    verbs_runs.add_verbs(verb)
    from workbench.cli.verb_extract import add_extract_verb

    add_extract_verb(verb)
    from workbench.cli.verb_speed import add_speed_verb

    add_speed_verb(verb)
    from workbench.cli.verb_criticals import add_criticals_verb

    add_criticals_verb(verb)
    from workbench.cli.verb_compare import add_compare_verb

    add_compare_verb(verb)
    return parser


def main(argv=None) -> int:
    """Run the ``foldline`` command; returns the exit status."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        with warnings.catch_warnings():
            if getattr(args, "json", False):
                # Keep stdout a single JSON object; warnings still go to stderr.
                warnings.simplefilter("default")
            warnings.showwarning = _show_warning  # restored when the block ends
            return int(args.func(args) or 0)
    except (_UsageError, FoldlineError) as exc:
        settings = sys.modules.get("workbench.runs.settings")
        if settings is not None and isinstance(exc, settings.SettingError):
            from workbench.cli.options import flag_error   # in the words of the command line

            exc = flag_error(exc, locals().get("args"))
        _fail(str(exc))
        return 2
    except FileNotFoundError as exc:
        _fail(f"{exc.filename}: no such file")
        return 2
    except IsADirectoryError as exc:
        _fail(f"{exc.filename}: is a folder, expected a file")
        return 2
    except PermissionError as exc:
        _fail(f"{exc.filename}: permission denied")
        return 2
    except KeyboardInterrupt:
        _fail("interrupted; no output file was left behind")
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # a bug: say so in one line, show the traceback only on request
        if os.environ.get("FOLDLINE_DEBUG"):
            raise
        _fail(f"internal error: {type(exc).__name__}: {exc} (set FOLDLINE_DEBUG=1 for details)", status="")
        return 1


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """Print a warning as one line ``foldline: warning: ...`` (no source file or code line)."""
    text = " ".join(str(message).split())
    if not issubclass(category, FoldlineWarning):
        text = f"{category.__name__}: {text}"
    (file or sys.stderr).write(f"{PROG}: warning: {text}\n")


def _fail(message: str, status: str = "") -> None:
    text = " ".join(str(message).split())
    sys.stderr.write(f"{PROG}: error: {text}\n")
