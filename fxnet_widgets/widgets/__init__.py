"""Live widgets (ipywidgets + bqplot) bound to the bit-exact kernel.

One :class:`Session` per network computes; the views (``...Plot``,
``...Panel``) only draw the arrays it hands them, and each can be created alone
on a shared session. :class:`Explorer` composes all of them.
"""

from .boundary import BoundaryPanel, CubePanel, SlicePlot
from .controls import PlanControlsPanel
from .events import EventsPlot, HistogramPlot, HistogramsPanel
from .explorer import Explorer, demo_explorer
from .metrics import MetricsPanel
from .preview import PreviewPanel
from .results import SessionResult
from .session import Session, default_plan
from .status import StatusLinePanel, SweepProgressBar

__all__ = [
    "BoundaryPanel",
    "CubePanel",
    "EventsPlot",
    "Explorer",
    "HistogramPlot",
    "HistogramsPanel",
    "MetricsPanel",
    "PlanControlsPanel",
    "PreviewPanel",
    "Session",
    "SessionResult",
    "SlicePlot",
    "StatusLinePanel",
    "SweepProgressBar",
    "default_plan",
    "demo_explorer",
]
