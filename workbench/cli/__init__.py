"""The ``foldline`` command line (presentation layer)."""

from workbench.cli.main import build_parser, main

__all__ = ["main", "build_parser"]
