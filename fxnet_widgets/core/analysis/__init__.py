"""Design analysis: error metrics, hardware cost, throughput, error attribution, search.

Pure numpy on top of the bit-exact kernel; no widget library is imported here.
"""

from .attribution import STAGES, Attribution, AttributionRow, attribute_errors, generous_plan
from .cost import COST_KEYS, HardwareCost, LayerCost, hardware_cost
from .csd import csd, csd_adders, csd_nonzero, csd_string
from .metrics import ErrorMetrics, error_metrics
from .search import (
    TUNE_MOVES,
    SerialExecutor,
    SweepRecord,
    TuneResult,
    evaluate_plans,
    pareto_front,
    parse_grid,
    start_plan,
    sweep,
    text_progress,
    tune,
)
from .video import VIDEO_FORMATS, Throughput, VideoFormat, throughput

__all__ = [
    "COST_KEYS",
    "STAGES",
    "TUNE_MOVES",
    "VIDEO_FORMATS",
    "Attribution",
    "AttributionRow",
    "ErrorMetrics",
    "HardwareCost",
    "LayerCost",
    "SerialExecutor",
    "SweepRecord",
    "Throughput",
    "TuneResult",
    "VideoFormat",
    "attribute_errors",
    "csd",
    "csd_adders",
    "csd_nonzero",
    "csd_string",
    "error_metrics",
    "evaluate_plans",
    "generous_plan",
    "hardware_cost",
    "pareto_front",
    "parse_grid",
    "start_plan",
    "sweep",
    "text_progress",
    "throughput",
    "tune",
]
