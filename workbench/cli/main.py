"""The ``foldline`` command: its parser, the error contract and the entry point.

The verbs live one module each in :mod:`workbench.cli.verbs`; what their ends share (JSON,
tables, output folders) in :mod:`workbench.cli.output`.

Every verb takes ``--json`` and then prints exactly one JSON object on stdout.  Exit status 0 on
success; 2 with a single line ``foldline: error: ...`` on stderr for bad input (no traceback);
outputs are written to a temporary name and renamed into place, so a failure leaves no partial
file.
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings

from workbench import __version__
from workbench.cli.verbs import register_all
from workbench.errors import FoldlineError, FoldlineWarning

__all__ = ["main", "build_parser"]

PROG = "foldline"


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage error is one line and exit status 2."""

    def error(self, message):  # noqa: D401 - argparse API
        raise _UsageError(f"{message} (see '{self.prog} --help')")


class _UsageError(Exception):
    pass


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
    register_all(sub)
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
        exc = _in_flags(exc, locals().get("args"))
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


def _in_flags(exc, args):
    """A core error about a named setting or argument, in the words of the command line.

    The core names its fields (``samples_per_rev = 3: ...``); the options they come from are
    in one table (:data:`workbench.cli.options.FIELD_FLAGS`).  Translated: a tracking
    setting's error, and a function argument's (a :class:`~workbench.checks.FieldError` with
    no owner) whose field the table knows.  Errors about a file's contents keep their words.
    """
    checks = sys.modules.get("workbench.checks")
    if checks is None or not isinstance(exc, checks.FieldError):
        return exc
    from workbench.cli.options import FIELD_FLAGS, flag_error

    settings = sys.modules.get("workbench.runs.settings")
    if (settings is not None and isinstance(exc, settings.SettingError)) or (
            exc.owner is None and exc.field in FIELD_FLAGS):
        return flag_error(exc, args)
    return exc


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """Print a warning as one line ``foldline: warning: ...`` (no source file or code line)."""
    text = " ".join(str(message).split())
    if not issubclass(category, FoldlineWarning):
        text = f"{category.__name__}: {text}"
    (file or sys.stderr).write(f"{PROG}: warning: {text}\n")


def _fail(message: str, status: str = "") -> None:
    text = " ".join(str(message).split())
    sys.stderr.write(f"{PROG}: error: {text}\n")
