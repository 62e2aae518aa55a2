"""The verbs of the ``foldline`` command, one module each.

Each module defines its options and its command and registers itself with
``register(subparsers)``; :data:`VERBS` fixes the order ``foldline --help`` lists them in.
Registering imports the standard library only: a verb's module loads numpy, pandas or
matplotlib inside its command, when that verb runs.
"""

from __future__ import annotations

import importlib

__all__ = ["VERBS", "add_verb", "register_all"]

#: Module of each verb under ``workbench.cli.verbs``, in the order of ``foldline --help``.
VERBS = ("alias", "orders", "foldmap", "plan", "demo", "simulate", "track", "report", "batch",
         "extract", "speed", "criticals", "compare")


def add_verb(subparsers, name: str, help_text: str):
    """A verb's parser, with the ``--json`` option every verb takes."""
    p = subparsers.add_parser(name, help=help_text, description=help_text)
    p.add_argument("--json", action="store_true", help="print one JSON object on stdout")
    return p


def register_all(subparsers) -> None:
    """Register every verb of :data:`VERBS`, in order."""
    for name in VERBS:
        importlib.import_module(f"{__name__}.{name}").register(subparsers)
