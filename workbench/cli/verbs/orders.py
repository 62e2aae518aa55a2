"""``foldline orders``: every line of a machine file, in orders of the reference shaft or in Hz."""

from __future__ import annotations

from workbench.cli.output import finish
from workbench.cli.verbs import add_verb

__all__ = ["register", "cmd_orders"]


def cmd_orders(args) -> int:
    """List the machine's lines."""
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

    def show():
        import pandas as pd

        print(f"{machine.name}: orders of the reference shaft '{machine.reference}'")
        table = pd.DataFrame(rows)
        table["order"] = table["order"].map(lambda v: "" if v is None or v != v else f"{v:.4f}")
        table["hz"] = table["hz"].map(lambda v: "" if v is None or v != v else f"{v:.2f}")
        print(table.to_string(index=False))

    return finish(args, out, show)


def register(subparsers) -> None:
    """Add ``foldline orders`` to the command."""
    p = add_verb(subparsers, "orders", "every line of a machine file, in orders of the reference shaft or in Hz")
    p.add_argument("machine", metavar="MACHINE", help="machine file (TOML)")
    p.set_defaults(func=cmd_orders)
