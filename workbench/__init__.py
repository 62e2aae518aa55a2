"""foldline: plan run-up tests, predict aliasing of every machine order, track runs in angle.

The import package is ``workbench``; the distribution and the command are ``foldline``.
Layers (data flows down, nothing imports upward): ``machine`` -> ``sampling`` -> ``angle`` ->
``runs`` -> presentation (``plots``, ``ui``, ``report``, ``cli``, ``batch``).
"""

from workbench.errors import FoldlineError, FoldlineWarning

__version__ = "0.1.0"

__all__ = ["FoldlineError", "FoldlineWarning", "__version__"]
