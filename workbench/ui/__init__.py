"""Notebook panels (presentation layer): ipywidgets controls around the package's functions.

Each panel is a small class whose controls are attributes (so code and tests can drive them)
and whose ``widget`` is shown with ``panel.show()`` or by leaving the panel last in a cell.

- :class:`FoldMapPanel` -- rate, filter, speed range, threshold, sources and bands against the
  fold map, the collision table and the advisor's verdict.
- :class:`SourceEditorPanel` -- change tooth counts, bearing geometry or rotor counts and compare
  lines, collisions and the recommended rate before and after.
- :class:`AngleDomainPanel` -- a recorded run from tacho to order map, order cuts and order
  spectrum, with the predicted (direct and folded) lines overlaid and aliases identified.
- :class:`CriticalsPanel` -- Bode and polar plots of chosen orders of a run and the critical
  speeds they show (amplification factor, phase change, separation margin).
"""

from workbench.ui.angle_panel import AngleDomainPanel
from workbench.ui.criticals_panel import CriticalsPanel
from workbench.ui.foldmap_panel import FoldMapPanel
from workbench.ui.source_editor import SourceEditorPanel

__all__ = ["FoldMapPanel", "SourceEditorPanel", "AngleDomainPanel", "CriticalsPanel"]

from workbench.ui.map_explorer import MapExplorer  # noqa: E402  (zoom, cursor read-out, markers)

__all__ += ["MapExplorer"]
from workbench.ui.compare_panel import ComparePanel  # noqa: E402  (run against run)

__all__ += ["ComparePanel"]
