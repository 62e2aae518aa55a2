"""Report layer: one self-contained HTML file (no server, no network) for a machine, a plan and
optionally a tracked run.

Typical use::

    from workbench.report import write_report
    report = write_report("machine.toml", "plan.toml", "runup.wav", out="report.html")
    report.sections, report.sha256
"""

from workbench._lazy import lazy_names

# Imported on first use (PEP 562): registering the ``report`` verb must not load numpy.
__getattr__, __dir__ = lazy_names(__name__, {
    "workbench.report.document": ("SAFETY_TEXT", "SECTION_TITLES", "InputFile", "Report",
                                  "build_report", "file_sha256", "write_report"),
    "workbench.runs.cut_orders": ("default_cut_orders",)}, globals())


__all__ = ["Report", "InputFile", "build_report", "write_report", "default_cut_orders",
           "file_sha256", "SAFETY_TEXT", "SECTION_TITLES"]
