"""Run against run in a notebook: the runs' order cuts, overall levels and order spectra
aligned on speed (:func:`workbench.runs.compare.compare_runs`), with the largest changes."""

from __future__ import annotations

import html

import ipywidgets as widgets

from workbench.plots.common import figure_bytes
from workbench.plots.compare import plot_compare_cuts, plot_compare_overall, plot_compare_spectra
from workbench.ui._common import STYLE, collect_warnings, html_table

__all__ = ["ComparePanel"]


class ComparePanel:
    """Two or more runs of one machine compared on a common speed grid.

    Parameters
    ----------
    runs : sequence of path-like or RunAnalysis
        Run files (tracked here with the same options) or runs already tracked.
    labels : sequence of str, optional
        One per run (default: the file names).
    machine : Machine or path-like, optional
    **track_options
        Options of :func:`~workbench.runs.analysis.track_run` (``samples_per_rev``,
        ``revs_per_block``, ``cut_orders``, ...); the runs are cut at the first run's cut
        orders unless ``cut_orders`` is given.

    Attributes
    ----------
    comparison : RunComparison
    tabs : ipywidgets.Tab
        "order cuts", "overall level", "order spectra" pictures.
    changes, notes : ipywidgets.HTML
    widget : ipywidgets.VBox
    """

    def __init__(self, runs, *, labels=None, machine=None, dpi=80, **track_options):
        from workbench.runs.analysis import RunAnalysis, track_run
        from workbench.runs.compare import compare_runs

        analyses = []
        opts = dict(track_options)
        opts.setdefault("rf_map", False)
        with collect_warnings() as caught:
            for r in runs:
                a = r if isinstance(r, RunAnalysis) else track_run(r, machine=machine, **opts)
                analyses.append(a)
                if not opts.get("cut_orders"):
                    opts["cut_orders"] = tuple(float(c.order) for c in a.cuts)
            self.comparison = compare_runs(analyses, labels=labels)
        c = self.comparison
        image = dict(format="png", layout=widgets.Layout(max_width="100%"))
        self.cuts_figure = widgets.Image(value=figure_bytes(plot_compare_cuts(c), dpi=dpi), **image)
        self.overall_figure = widgets.Image(value=figure_bytes(plot_compare_overall(c), dpi=dpi), **image)
        top = analyses[0].top_order
        self.spectra_figure = widgets.Image(value=figure_bytes(plot_compare_spectra(c, max_order=top), dpi=dpi),
                                            **image)
        self.tabs = widgets.Tab(children=[self.cuts_figure, self.overall_figure, self.spectra_figure])
        for i, title in enumerate(("order cuts", "overall level", "order spectra")):
            self.tabs.set_title(i, title)
        runs_html = html_table(c.runs.to_dict("records"),
                               (("label", "run"), ("direction", "direction"), ("rpm_min", "from (rpm)"),
                                ("rpm_max", "to (rpm)"), ("unit", "unit")),
                               css_class="foldline-compare-runs", formats={"rpm_min": ".0f", "rpm_max": ".0f"})
        ch = c.changes()
        self.changes = widgets.HTML(STYLE + "<b>Runs</b>" + runs_html + "<b>Largest change of each order cut "
                                    "against the first run</b>" + html_table(
                                        ch.to_dict("records"),
                                        (("order", "order"), ("label", "run"), ("change_db", "change (dB)"),
                                         ("at_rpm", "at (rpm)")),
                                        css_class="foldline-compare-changes",
                                        formats={"order": "g", "change_db": "+.1f", "at_rpm": ".0f"},
                                        empty="no cut to compare"))
        self.notes = widgets.HTML(STYLE + "".join(f'<div class="foldline-note">{html.escape(m)}</div>'
                                                  for m in list(c.notes) + list(caught.messages)))
        self.widget = widgets.VBox([self.changes, self.tabs, self.notes])

    def show(self):
        """The widget, for ``display``."""
        return self.widget

    def _ipython_display_(self):
        from IPython.display import display

        display(self.widget)
