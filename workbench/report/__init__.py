"""Report layer: one self-contained HTML file (no server, no network) for a machine, a plan and
optionally a tracked run.

Typical use::

    from workbench.report import write_report
    report = write_report("machine.toml", "plan.toml", "runup.wav", out="report.html")
    report.sections, report.sha256
"""

from workbench.report.document import (SAFETY_TEXT, SECTION_TITLES, InputFile, Report,
                                       build_report, default_cut_orders, file_sha256,
                                       write_report)

__all__ = ["Report", "InputFile", "build_report", "write_report", "default_cut_orders",
           "file_sha256", "SAFETY_TEXT", "SECTION_TITLES"]
