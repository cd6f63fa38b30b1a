"""Interactive panels over :mod:`kit.analysis`: ipywidgets controls and Bokeh figures.

Each panel is built from a Design (or a Vehicle or DesignReport) and shown with
``IPython.display.display(panel)``: live in JupyterLab, and as a static snapshot (control
values, readouts, figures) in an executed workbook or record. Importing this package has no
side effects and imports neither ipywidgets nor Bokeh until a panel is used.

=================  =========================================================================
OverviewPanel      layout seen from above, parts and their share of the inertia
HoverPanel         hover thrusts against limits, torque authority, T/W, with a payload slider
FailurePanel       failed rotors, free directions, equilibrium, poles, risk, time response
WheelPanel         H2 ratio against wheel momentum with a marker, flags, wheel sizing
PlacementPanel     a part moved over a grid: risk / controllability map, with progress
ComparePanel       two revisions: a chosen quantity per case, one case's thrusts and poles
=================  =========================================================================

BokehJS comes once from the local Bokeh installation: :mod:`kit.panels.serve` is a Jupyter
server extension that serves it, and every figure output carries a few lines that load it
from there when the page does not have it yet (a record embeds it itself). The setup cell
(:func:`setup`) loads it before any panel is shown: the live figures are jupyter_bokeh
``BokehModel`` widgets, built once per panel and updated in place (see
:mod:`kit.panels.base`).
"""

from __future__ import annotations

import importlib

_PANELS = {
    "OverviewPanel": "kit.panels.overview",
    "HoverPanel": "kit.panels.hover",
    "FailurePanel": "kit.panels.failure",
    "WheelPanel": "kit.panels.wheel",
    "PlacementPanel": "kit.panels.placement",
    "ComparePanel": "kit.panels.compare",
    "TextProgress": "kit.panels.progress",
    "WidgetProgress": "kit.panels.progress",
}

__all__ = [*_PANELS, "setup"]


def __getattr__(name: str):
    if name in _PANELS:
        return getattr(importlib.import_module(_PANELS[name]), name)
    raise AttributeError(f"module 'kit.panels' has no attribute {name!r}")


def __dir__():
    return sorted(__all__)


class BokehLoader:
    """A display whose output loads BokehJS in JupyterLab (a few hundred bytes; no library).

    Showing it is optional: each figure carries the same loader. Its ``text/html`` is inert
    in a record (no Jupyter page config there, and the record embeds BokehJS itself).
    """

    def _repr_mimebundle_(self, include=None, exclude=None):
        from kit import plots

        return {"text/plain": "BokehJS from the local installation (kit.panels.setup)",
                "text/html": f"<script type=\"text/javascript\">{plots.loader_js()}</script>"}


def setup() -> BokehLoader:
    """The loader cell of a workbook: ``kit.panels.setup()`` as the last line of a cell."""
    return BokehLoader()
