"""``foldline foldmap``: fold map, collisions and overlaps of a machine under a plan at one rate."""

from __future__ import annotations

from workbench.cli.output import finish, rate_option, print_table
from workbench.cli.verbs import add_verb

__all__ = ["register", "cmd_foldmap", "collision_records", "print_collisions"]


def collision_records(table) -> list:
    """The rows of a collision table as dicts of its published columns (JSON output)."""
    from workbench.sampling import COLLISION_COLUMNS

    return [{k: getattr(row, k) for k in COLLISION_COLUMNS} for row in table.itertuples(index=False)]


def print_collisions(title: str, table) -> None:
    """Print a collision table's published columns under ``title: <rows>``."""
    from workbench.sampling import COLLISION_COLUMNS

    print_table(title, table, COLLISION_COLUMNS)


def cmd_foldmap(args) -> int:
    """Fold map and collision table at ``--rate`` (and the figure with ``--png``)."""
    from workbench.machine import read_machine
    from workbench.sampling import find_collisions, fold_map, read_plan

    machine = read_machine(args.machine)
    plan = read_plan(args.plan)
    plan.check_against(machine.lines())
    rate = rate_option(args.rate)
    if args.png:  # refuse an existing figure (or a missing folder) before the work, not after
        from workbench.fileio import check_writable

        check_writable(args.png, force=args.force)
    fmap = fold_map(machine, plan, rate)
    table = find_collisions(machine, plan, rate, fmap=fmap)
    if args.png:
        from workbench.plots import plot_fold_map, save_figure

        fig = plot_fold_map(fmap, plan, collisions=table, view=args.view,
                            log_frequency=getattr(args, "log_frequency", False),
                            inset_hz=getattr(args, "inset_hz", None))
        save_figure(fig, args.png, force=args.force)
    coll = table[table["kind"] == "collision"]
    over = table[table["kind"] == "overlap"]
    out = {
        "rate_hz": rate,
        "filter": plan.filter.describe(),
        "threshold_db": plan.threshold_db,
        "collisions": collision_records(coll),
        "overlaps": collision_records(over),
    }

    def show():
        print(f"{machine.name} at {rate:g} Hz ({plan.filter.describe()}), threshold {plan.threshold_db:g} dB")
        print_collisions("collisions (folded lines inside a band)", coll)
        print_collisions("overlaps (direct lines inside a band)", over)
        if args.png:
            print(f"fold map written to {args.png}")

    return finish(args, out, show)


def register(subparsers) -> None:
    """Add ``foldline foldmap`` to the command."""
    p = add_verb(subparsers, "foldmap", "fold map, collisions and overlaps of a machine under a plan at one rate")
    p.add_argument("machine", metavar="MACHINE")
    p.add_argument("plan", metavar="PLAN")
    p.add_argument("--rate", required=True, type=float, metavar="HZ")
    p.add_argument("--png", metavar="FILE", help="write the fold map figure to FILE")
    p.add_argument("--view", choices=("hz", "order"), default="hz", help="frequency axis of the figure")
    p.add_argument("--log-frequency", action="store_true",
                   help="logarithmic frequency (or order) axis: spreads the low-frequency region")
    p.add_argument("--inset-hz", type=float, metavar="HZ",
                   help="with --png: the region from 0 to HZ enlarged beside the map (bearing bands, low lines)")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.set_defaults(func=cmd_foldmap)
