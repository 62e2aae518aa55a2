"""Named choices shared by the layers and the command (imported by any layer; imports nothing).

The command builds its parser from these without loading a numerical or plotting library, and
the figures, panels and reports check against the same tuples.
"""

from __future__ import annotations

__all__ = ["OVERLAYS"]

#: What is drawn over a measured map or spectrum: ``"none"`` (the measurement alone, the
#: default), ``"matched"`` (the predicted lines matched to measured ridges), ``"all"`` (every
#: predicted line).
OVERLAYS = ("none", "matched", "all")
