"""``foldline batch``: many runs tracked with the same settings, locally or on a Dask cluster."""

from __future__ import annotations

import sys
import time

from workbench.cli.output import finish
from workbench.cli.verbs import add_verb
from workbench.errors import InputError

__all__ = ["register", "cmd_batch", "TextProgress"]


class TextProgress:
    """A one-line progress bar on a text stream (stderr): runs finished out of all runs."""

    def __init__(self, stream=None, width: int = 30):
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self.t0 = time.monotonic()
        self._shown = False

    def __call__(self, finished: int, total: int, skipped: int, failed: int) -> None:
        frac = finished / total if total else 1.0
        filled = int(round(frac * self.width))
        bar = "#" * filled + "-" * (self.width - filled)
        extra = []
        if skipped:
            extra.append(f"{skipped} skipped")
        if failed:
            extra.append(f"{failed} failed")
        tail = f" ({', '.join(extra)})" if extra else ""
        self.stream.write(f"\rbatch [{bar}] {finished}/{total} runs{tail}, "
                          f"{time.monotonic() - self.t0:.0f} s ")
        self.stream.flush()
        self._shown = True

    def close(self) -> None:
        if self._shown:
            self.stream.write("\n")
            self.stream.flush()


def cmd_batch(args) -> int:
    """Track many runs with the same settings; summary as Parquet and CSV."""
    from workbench.batch.core import BatchSettings, run_batch
    from workbench.cli.options import track_options_from_args

    opts = track_options_from_args(args)
    cut_orders = opts.pop("cut_orders", None)
    if cut_orders is None:
        cut_orders = _default_cuts(args, opts)
    settings = BatchSettings.make(track=opts, machine_path=args.machine, plan_path=args.plan,
                                  cut_orders=cut_orders, n_top=args.top)
    bar = None if args.quiet else TextProgress()
    try:
        result = run_batch(args.runs, args.out, settings=settings, workers=args.workers,
                           scheduler=args.scheduler, progress=bar)
    finally:
        if bar is not None:
            bar.close()

    def show():
        where = result.scheduler or "this process (serial)"
        print(f"{len(result.done)} run(s) tracked, {len(result.skipped)} skipped (already done), "
              f"{len(result.failed)} failed, in {result.seconds:.1f} s on {where}")
        for f, e in result.failed:
            print(f"  failed: {f}: {e}")
        print(f"summary: {result.summary_parquet} and {result.summary_csv}")

    return finish(args, {"out": str(args.out), **result.to_dict()}, show)


def _default_cuts(args, opts) -> tuple:
    """The default cut orders' rule (order 1 and the plan bands' line orders when machine and
    plan are given), up to the settings' top order."""
    from workbench.runs.settings import TrackingSettings

    machine = plan = None
    if args.machine and args.plan:
        from workbench.machine import read_machine
        from workbench.sampling import read_plan

        machine, plan = read_machine(args.machine), read_plan(args.plan)
    st = TrackingSettings.from_options(None, samples_per_rev=opts.get("samples_per_rev"),
                                       max_order=opts.get("max_order"))
    return st.cut_orders_for(machine=machine, plan=plan)


def _workers(text: str) -> int:
    s = str(text).strip().lower()
    if s == "serial":
        return 0
    try:
        n = int(s)
    except ValueError:
        raise InputError(f"--workers {text!r}: give a number of worker processes, or 0 / serial "
                         "to run in this process without Dask") from None
    if n < 0:
        raise InputError(f"--workers {text!r}: must be 0 (serial) or more")
    return n


def register(subparsers) -> None:
    """Add ``foldline batch`` to the command."""
    from workbench.cli.options import add_track_options

    p = add_verb(subparsers, "batch", "track many runs with the same settings on Dask; summary as Parquet and CSV")
    p.add_argument("runs", nargs="+", metavar="RUN", help="run files (on storage every worker can read)")
    p.add_argument("--out", required=True, metavar="DIR", help="output folder (summary and per-run CSV)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="use a running Dask scheduler, e.g. tcp://host:8786, instead of a local cluster")
    p.add_argument("--workers", type=_workers, default=2, metavar="N",
                   help="worker processes of the local cluster (default 2); 0 or 'serial': no Dask")
    p.add_argument("--machine", metavar="MACHINE", help="machine file: predicted lines and aliases")
    p.add_argument("--plan", metavar="PLAN", help="plan file: the bands whose level is reported")
    p.add_argument("--top", type=int, default=5, metavar="N", help="peaks listed per run (default 5)")
    p.add_argument("--quiet", action="store_true", help="no progress bar on stderr")
    add_track_options(p)
    p.set_defaults(func=cmd_batch)
