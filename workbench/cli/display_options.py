"""Command-line options that say how the results of a tracked run are shown (``track``, ``report``).

They change figures and tables only, never the tracking itself, so a run tracked once can be
shown many ways.
"""

from __future__ import annotations

__all__ = ["add_display_options", "display_options_from_args", "analysis_options_from_args"]


def add_display_options(p) -> None:
    """``--overlay`` (and the other display options) on a verb's parser."""
    from workbench.plots.angle import OVERLAYS

    g = p.add_argument_group("display")
    g.add_argument("--overlay", choices=OVERLAYS, default="none",
                   help="predicted lines drawn over the order map, the rpm-frequency map and the order "
                        "spectrum: none (default: the measurement alone), matched (the lines matched "
                        "to measured ridges), all")
    g.add_argument("--overall-band", metavar="LO,HI",
                   help="overall level (RMS against rpm) of this band only, Hz (default: the whole band)")


def display_options_from_args(args) -> dict:
    """Keyword options of the figure writers from the parsed display options."""
    return {"overlay": getattr(args, "overlay", "none") or "none"}


def analysis_options_from_args(args) -> dict:
    """Keyword options of ``track_run`` that come from the display group (None left out)."""
    from workbench.cli.options import _band

    band = getattr(args, "overall_band", None)
    return {} if band is None else {"overall_band_hz": _band(band, "--overall-band")}
