"""``foldline extract``: order extraction by the Vold-Kalman filter (waveforms and envelopes)."""

from __future__ import annotations

import warnings
from pathlib import Path

from workbench.cli.output import channel_folders, check_out_folder, finish, thin
from workbench.cli.verbs import add_verb
from workbench.errors import FoldlineWarning, InputError

__all__ = ["register", "cmd_extract", "write_extract_outputs"]

#: Tracking options that shape an order spectrum and mean nothing to the extraction.
_UNUSED = ("samples_per_rev", "revs_per_block", "envelope_hz", "cut_orders", "cut_bandwidth_orders")


def _outputs(orders, out: Path) -> list:
    from workbench.runs.extraction import order_files

    return order_files(orders, out) + [out / "order_envelopes.png"]


def cmd_extract(args) -> int:
    """Extract orders of a run's channel and print (and optionally write) them."""
    import numpy as np

    from workbench.angle.vold_kalman import extract_orders
    from workbench.cli.options import track_options_from_args
    from workbench.textparse import parse_orders
    from workbench.runs import read_run
    from workbench.runs.analysis import SPEED_OPTIONS, run_speed, vibration_channels

    orders = parse_orders(args.orders, "--orders")
    if len(set(orders)) != len(orders):
        raise InputError(f"--orders {args.orders!r}: an order is given twice; give each order once")
    from workbench.angle.vold_kalman import FILTER_ORDERS

    if args.filter_order not in FILTER_ORDERS:
        raise InputError(f"--filter-order {args.filter_order}: allowed 1, 2 or 3 (order of the "
                         "structural equation; 2 is the usual choice)")
    for name, value in (("--bandwidth", args.bandwidth), ("--bandwidth-pct", args.bandwidth_pct)):
        if value is not None and not (0 < value < float("inf")):
            raise InputError(f"{name} {value:g}: must be a positive number")
    opts = track_options_from_args(args)
    unused = [k for k in _UNUSED if k in opts]
    if unused:
        warnings.warn(f"--{unused[0].replace('_', '-')} shapes order spectra; extract ignores it",
                      FoldlineWarning, stacklevel=1)
    out = Path(args.out) if args.out else None
    if out is not None:
        check_out_folder(out, force=args.force, hint="; give a folder")
    run = read_run(args.run, rate_hz=opts.get("rate_hz"))
    if out is not None and not float(run.rate_hz).is_integer():
        raise InputError(f"--out {out}: the run's rate {run.rate_hz:g} Hz is not a whole number, so "
                         "its order waveforms cannot be WAV files; leave --out away and use --json")
    rows = vibration_channels(run, opts.get("channels"), tacho=opts.get("tacho"),
                              speed_channel=opts.get("speed_channel"))
    names = [run.channels[i].name for i in rows]
    folders = channel_folders(out, names) if out is not None else {}
    for folder in folders.values():   # refuse before any work when an output would be replaced
        check_out_folder(folder, [p.name for p in _outputs(orders, folder)], force=args.force)
    angle, speed_source = run_speed(run, **{k: opts[k] for k in SPEED_OPTIONS if k in opts})
    files, per_channel, extractions = [], [], []
    for row, name in zip(rows, names):
        channel = run.channels[row]
        x = run.channel(name)
        ex = extract_orders(x, run.rate_hz, angle, orders, bandwidth_hz=args.bandwidth,
                            bandwidth_pct=args.bandwidth_pct, filter_order=args.filter_order)
        del x
        written = write_extract_outputs(ex, folders[name], unit=channel.unit, force=args.force,
                                        title=f"{Path(args.run).name}, channel {name}") \
            if out is not None else []
        files.extend(written)
        keep = thin(len(ex.time_s))
        per_channel.append({
            "channel": name,
            "unit": channel.unit,
            "orders": [
                {
                    "order": o,
                    "time_s": ex.time_s[keep],
                    "rpm": ex.rpm[keep],
                    "amplitude": ex.amplitude[i, keep],
                    "phase_deg": ex.phase_deg[i, keep],
                }
                for i, o in enumerate(ex.orders)
            ],
        })
        extractions.append((channel, ex))
    channel, ex = extractions[0]
    result = {
        "source": str(args.run),
        "channel": channel.name,
        "unit": channel.unit,
        "rate_hz": run.rate_hz,
        "speed_source": speed_source,
        "filter_order": ex.filter_order,
        "bandwidth_hz": None if args.bandwidth_pct is not None else float(ex.bandwidth_hz[0, 0]),
        "bandwidth_pct": args.bandwidth_pct,
        "envelope_rate_hz": ex.envelope_rate_hz,
        "orders": per_channel[0]["orders"],
    }
    if len(per_channel) > 1:           # the first channel's keys stay; every channel is listed
        result["channels"] = per_channel

    def show():
        bw = (f"{args.bandwidth_pct:g} % of each order" if args.bandwidth_pct is not None
              else f"{ex.bandwidth_hz[0, 0]:g} Hz")
        print(f"{args.run}: {run.rate_hz:g} S/s, speed from {speed_source}: "
              f"{np.nanmin(ex.rpm):.0f}-{np.nanmax(ex.rpm):.0f} rpm")
        print(f"Vold-Kalman extraction, -3 dB bandwidth {bw}, filter order {ex.filter_order}, "
              f"envelopes at {ex.envelope_rate_hz:g} Hz")
        for chan, each in extractions:
            unit = f" {chan.unit}" if chan.unit else ""
            print(f"channel {chan.name}:")
            for i, o in enumerate(each.orders):
                amp = each.amplitude[i]
                j = int(np.argmax(amp))
                print(f"  order {o:g}: peak amplitude {amp[j]:.4g}{unit} at {each.rpm[j]:.0f} rpm "
                      f"(t = {each.time_s[j]:.2f} s), mean {np.mean(amp):.4g}{unit}")
        if files:
            print(f"outputs written to {out}")

    return finish(args, result, show, files)


def write_extract_outputs(ex, out: Path, *, unit: str = "", force: bool = False, title=None) -> list:
    """Write each order's waveform (float32 WAV), envelope (CSV) and the envelope figure (PNG).

    Parameters
    ----------
    ex : OrderExtraction
    out : Path
        Folder (created if missing).
    unit : str
        The channel's unit (figure label).
    force : bool
        Replace existing files.

    Returns
    -------
    list of Path
    """
    from workbench.plots import plot_order_envelopes, save_figure
    from workbench.runs.extraction import write_order_envelope, write_order_waveform

    out.mkdir(parents=True, exist_ok=True)
    files = []
    for o in ex.orders:
        files.append(write_order_waveform(ex, o, out, force=force))
        files.append(write_order_envelope(ex, o, out, force=force))
    png = out / "order_envelopes.png"
    save_figure(plot_order_envelopes(ex, unit=unit, title=title), png, force=force)
    files.append(png)
    return files


def register(subparsers) -> None:
    """Add ``foldline extract`` to the command."""
    from workbench.cli.options import add_track_options

    p = add_verb(subparsers, "extract", "extract orders' waveforms and envelopes with the "
                                        "Vold-Kalman filter (close and crossing orders separated)")
    p.add_argument("run", metavar="RUN", help="run file (WAV, CSV, NPZ, MAT, MF4 or HDF5; a .json sidecar beside it)")
    add_track_options(p)
    p.add_argument("--orders", required=True, metavar="K1,K2",
                   help="orders to extract together, e.g. 4,4.1")
    bw = p.add_mutually_exclusive_group()
    bw.add_argument("--bandwidth", type=float, metavar="HZ",
                    help="-3 dB bandwidth around each order, Hz (default 2)")
    bw.add_argument("--bandwidth-pct", type=float, metavar="P",
                    help="-3 dB bandwidth as a percentage of each order's frequency")
    p.add_argument("--filter-order", type=int, default=2, metavar="N",
                   help="order of the structural equation: 1, 2 (default) or 3")
    p.add_argument("--out", metavar="DIR",
                   help="write order_<k>.wav (float32, the run's rate and length), order_<k>.csv "
                        "and order_envelopes.png into this folder")
    p.add_argument("--force", action="store_true", help="replace existing outputs in the folder")
    p.set_defaults(func=cmd_extract)
