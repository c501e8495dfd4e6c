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
    emulate,
    q_notation,
    quantise,
)

__version__ = "0.1.0"

# public names that live in modules needing optional or heavy imports: name -> module
_LAZY: dict[str, str] = {
    # -- lazy exports (one line each) --
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
    "emulate",
    "q_notation",
    "quantise",
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
