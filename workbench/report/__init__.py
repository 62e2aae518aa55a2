"""Report layer: one self-contained HTML file (no server, no network) for a machine, a plan and
optionally a tracked run.

Typical use::

    from workbench.report import write_report
    report = write_report("machine.toml", "plan.toml", "runup.wav", out="report.html")
    report.sections, report.sha256
"""

import importlib

# Imported on first use (PEP 562): registering the ``report`` verb must not load numpy.
_HOME = {name: "workbench.report.document" for name in (
    "SAFETY_TEXT", "SECTION_TITLES", "InputFile", "Report", "build_report", "default_cut_orders",
    "file_sha256", "write_report")}


def __getattr__(name):
    mod = _HOME.get(name)
    if mod is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(mod), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_HOME))


__all__ = ["Report", "InputFile", "build_report", "write_report", "default_cut_orders",
           "file_sha256", "SAFETY_TEXT", "SECTION_TITLES"]
