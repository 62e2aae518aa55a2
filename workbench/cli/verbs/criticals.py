"""``foldline criticals RUN``: order tracks with phase, critical speeds, Bode/polar/Campbell views."""

from __future__ import annotations

from pathlib import Path

from workbench.cli.output import check_out_folder, finish, print_frame, write_csv
from workbench.cli.verbs import add_verb
from workbench.errors import InputError

__all__ = ["register", "cmd_criticals", "CRITICALS_FILES", "write_criticals_outputs"]

#: Files ``--out`` writes.
CRITICALS_FILES = ("tracks.csv", "criticals.csv", "bode.png", "polar.png", "campbell.png")


def _operating(text):
    if text is None:
        return None
    try:
        lo, hi = (float(v) for v in str(text).split(","))
    except ValueError:
        raise InputError(f"--operating {text!r}: give the operating speed range in rpm as LO,HI, "
                         "e.g. 1450,1800") from None
    if not (0 < lo <= hi < float("inf")):
        raise InputError(f"--operating {text!r}: need 0 < LO <= HI (rpm)")
    return lo, hi


def _speed_and_channel_options(args) -> dict:
    """The tracking options this verb uses; the spectrum-only ones are refused."""
    from workbench.cli.options import track_options_from_args
    from workbench.runs.analysis import SPEED_OPTIONS

    opts = track_options_from_args(args)
    for key, flag in (("envelope_hz", "--envelope"), ("cut_orders", "--cut-orders"),
                      ("cut_bandwidth_orders", "--cut-bandwidth")):
        if key in opts:
            raise InputError(f"{flag}: not used by 'foldline criticals' (it tracks --orders "
                             "with phase); use 'foldline track' for envelopes and order cuts")
    if args.channel is not None:
        opts["channel"] = str(args.channel).strip()   # one, a list "1,3", or "all"
    keep = set(SPEED_OPTIONS) | {"channel", "rate_hz", "samples_per_rev", "revs_per_block"}
    return {k: v for k, v in opts.items() if k in keep}


def write_criticals_outputs(result, out: Path, *, force: bool = False) -> list:
    """Write the tracks and criticals (CSV) and the Bode, polar and Campbell figures (PNG)."""
    from workbench.plots import run_up_figures, save_figure

    out.mkdir(parents=True, exist_ok=True)
    files = []
    files.append(write_csv(result.track_table(), out / "tracks.csv", force=force))
    table = result.criticals_table()
    table["half_power_rpm"] = table["half_power_rpm"].map(
        lambda v: f"{v[0]:.1f}-{v[1]:.1f}" if isinstance(v, (list, tuple)) else v)
    files.append(write_csv(table, out / "criticals.csv", force=force))
    for path, fig in run_up_figures(result).items():
        save_figure(fig, out / path, force=force)
        files.append(out / path)
    return files


def cmd_criticals(args) -> int:
    """Order tracks with phase and critical speeds of a recorded run."""
    from workbench.textparse import parse_orders
    from workbench.runs.criticals import SAFETY_NOTE, run_criticals

    orders = parse_orders(args.orders, "--orders")
    opts = _speed_and_channel_options(args)
    operating = _operating(args.operating)
    out = Path(args.out) if args.out else None
    if out is not None:
        check_out_folder(out, CRITICALS_FILES, force=args.force)
    result = run_criticals(args.run, orders=orders, operating_rpm=operating,
                           machine=args.machine, offset_deg=args.phase_offset,
                           protect=not args.no_protect, rf_map=out is not None, **opts)
    files = write_criticals_outputs(result, out, force=args.force) if out is not None else []

    def show():
        print(f"{result.source}: speed from {result.speed_source}, "
              f"{result.shaft_angle.rpm_min:.0f}-{result.shaft_angle.rpm_max:.0f} rpm; "
              f"phase {result.phase_reference}"
              + ("" if result.phase_reference == "absolute" else
                 " (no once-per-rev reference: compare phases within this run only)"))
        if len(result.criticals):
            print("\ncritical speeds:")
            table = result.criticals_table()
            table["half_power_rpm"] = table["half_power_rpm"].map(lambda v: f"{v[0]:.0f}-{v[1]:.0f}")
            print_frame(table)
        else:
            print("\nno critical speed found in the tracked orders")
        if result.rejected:
            print(f"\npeaks not taken for criticals: {len(result.rejected)}")
            for ch, p in result.rejected[:10]:
                print(f"  {ch} order {p.order:g} at {p.rpm:.0f} rpm: {p.reason}")
        if files:
            print(f"\noutputs written to {out}")
        print(f"\nSafety: {SAFETY_NOTE}")

    return finish(args, result.to_dict(), show, files)


def register(subparsers) -> None:
    """Add ``foldline criticals`` to the command."""
    from workbench.cli.options import add_track_options

    p = add_verb(subparsers, "criticals", "order tracks with phase (Bode, polar), critical speeds "
                                          "and their amplification factors, Campbell diagram")
    p.add_argument("run", metavar="RUN", help="run file (WAV, CSV, NPZ, MAT, MF4 or HDF5; a .json sidecar beside it)")
    add_track_options(p)
    p.add_argument("--orders", default="1,2", metavar="K1,K2", help="orders to track (default 1,2)")
    p.add_argument("--operating", metavar="LO,HI", help="operating speed range, rpm (separation margins)")
    p.add_argument("--phase-offset", type=float, default=0.0, metavar="DEG",
                   help="added to every phase lag, degrees (e.g. the sensor's angle from the reference mark)")
    p.add_argument("--machine", metavar="MACHINE", help="machine file for the Campbell diagram (default: the sidecar's)")
    p.add_argument("--no-protect", action="store_true", help="switch alias protection off")
    p.add_argument("--out", metavar="DIR", help="write tracks.csv, criticals.csv, bode.png, polar.png, campbell.png")
    p.add_argument("--force", action="store_true", help="replace existing outputs in the folder")
    p.set_defaults(func=cmd_criticals)
