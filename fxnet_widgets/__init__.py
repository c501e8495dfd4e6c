"""fxnet-widgets: choose every fixed-point width of a small neural network with evidence.

The core (``fxnet_widgets.core``) is pure numpy; the widgets load lazily, so
``import fxnet_widgets`` does not import ipywidgets, bqplot or traitlets.
"""

from __future__ import annotations

import importlib
from typing import Any

from .core import (
    EVENT_NAMES,
    OVERFLOWS,
    ROUNDINGS,
    Emulation,
    IntegerNetwork,
    LayerPlan,
    Network,
    Plan,
    build_integer_network,
    emulate,
    q_notation,
    round_to_codes,
)
from .core.analysis import (
    VIDEO_FORMATS,
    Attribution,
    ErrorMetrics,
    HardwareCost,
    SweepRecord,
    TuneResult,
    attribute_errors,
    csd,
    csd_adders,
    error_metrics,
    hardware_cost,
    pareto_front,
    sweep,
    throughput,
    tune,
)
from .core.datapath import write_datapath
from .core.demo import build_demo, write_demo
from .core.export import export
from .core.images import RGBImage, read_image
from .core.imports import from_arrays, from_sklearn, load_npz, save_npz
from .core.labels import (
    LabelledPixels,
    labels_from_class_map,
    labels_from_csv,
    labels_from_mask,
    load_class_table,
    load_labels,
    sample_pixels,
)
from .core.onnx_io import load_onnx, save_onnx
from .core.refine import Refinement, refine
from .core.scenes import Scene, make_scene
from .core.starting import start_plan, starting_plan, suggest_plan
from .core.training import Training, TrainingReport, fit, train
from .core.version import VERSION

__version__ = VERSION

# public names that live in modules needing optional or heavy imports: name -> module
_LAZY: dict[str, str] = {
    # -- lazy exports (one line each) --
    "save_report": "fxnet_widgets.report",
    "BoundaryPanel": "fxnet_widgets.widgets.boundary",
    "CubePanel": "fxnet_widgets.widgets.boundary",
    "ComparePanel": "fxnet_widgets.widgets.compare",
    "SlicePlot": "fxnet_widgets.widgets.boundary",
    "PlanControlsPanel": "fxnet_widgets.widgets.controls",
    "EventsPlot": "fxnet_widgets.widgets.events",
    "HistogramPlot": "fxnet_widgets.widgets.events",
    "HistogramsPanel": "fxnet_widgets.widgets.events",
    "Explorer": "fxnet_widgets.widgets.explorer",
    "demo_explorer": "fxnet_widgets.widgets.explorer",
    "MetricsPanel": "fxnet_widgets.widgets.metrics",
    "MetricsGlancePanel": "fxnet_widgets.widgets.glance",
    "PreviewPanel": "fxnet_widgets.widgets.preview",
    "SearchPanel": "fxnet_widgets.widgets.search_panel",
    "Session": "fxnet_widgets.widgets.session",
    "StatusLinePanel": "fxnet_widgets.widgets.status",
    "SweepProgressBar": "fxnet_widgets.widgets.status",
    "FootagePanel": "fxnet_widgets.widgets.footage",
    "ColourLookup": "fxnet_widgets.core.footage",
    "Footage": "fxnet_widgets.core.footage",
    "FootageAnalysis": "fxnet_widgets.core.footage",
    "analyse_footage": "fxnet_widgets.core.footage",
    "analyse_footage_split": "fxnet_widgets.core.footage.parallel",
    "compile_float_lookup": "fxnet_widgets.core.footage",
    "compile_lookup": "fxnet_widgets.core.footage",
    "open_footage": "fxnet_widgets.core.footage",
    "write_demo_clip": "fxnet_widgets.core.footage",
    "synthesize": "fxnet_widgets.core.synth",
    "HardwarePanel": "fxnet_widgets.widgets.hardware",
}

__all__ = [
    "EVENT_NAMES",
    "OVERFLOWS",
    "ROUNDINGS",
    "Emulation",
    "IntegerNetwork",
    "LayerPlan",
    "Network",
    "Plan",
    "build_integer_network",
    "emulate",
    "export",
    "q_notation",
    "round_to_codes",
    "VIDEO_FORMATS",
    "Attribution",
    "ErrorMetrics",
    "HardwareCost",
    "SweepRecord",
    "TuneResult",
    "attribute_errors",
    "csd",
    "csd_adders",
    "error_metrics",
    "hardware_cost",
    "pareto_front",
    "sweep",
    "throughput",
    "tune",
    "LabelledPixels",
    "RGBImage",
    "Scene",
    "Training",
    "TrainingReport",
    "build_demo",
    "fit",
    "from_arrays",
    "from_sklearn",
    "labels_from_class_map",
    "labels_from_csv",
    "labels_from_mask",
    "load_class_table",
    "load_labels",
    "load_npz",
    "make_scene",
    "read_image",
    "sample_pixels",
    "save_npz",
    "load_onnx",
    "save_onnx",
    "Refinement",
    "refine",
    "start_plan",
    "starting_plan",
    "suggest_plan",
    "train",
    "write_demo",
    "write_datapath",
    *sorted(_LAZY),
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'fxnet_widgets' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
