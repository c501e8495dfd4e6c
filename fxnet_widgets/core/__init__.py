"""The pure core: numpy (and pillow for image files) only, never a widget library."""

from .formats import OVERFLOWS, ROUNDINGS, q_notation, round_to_codes
from .kernel import EVENT_NAMES, Emulation, IntegerNetwork, build_integer_network, emulate
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
    "build_integer_network",
    "emulate",
    "q_notation",
    "round_to_codes",
]
