"""The pure core: numpy (and pillow for image files) only, never a widget library."""

from .formats import OVERFLOWS, ROUNDINGS, q_notation
from .formats import quantise as quantise_values
from .kernel import EVENT_NAMES, Emulation, IntegerNetwork, emulate, quantise
from .network import Network
from .plan import LayerPlan, Plan

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
    "quantise_values",
]
