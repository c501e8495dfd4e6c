"""Real footage: video clips and image folders in, a colour look-up per plan, a per-frame timeline.

``av`` (PyAV) is imported only when a video file is opened or written.
"""

from .analyse import FootageAnalysis, analyse_footage, frame_decisions
from .democlip import demo_frames, write_demo_clip
from .lookup import ColourLookup, colour_index, compile_float_lookup, compile_lookup
from .reader import Footage, FootageInfo, Frame, open_footage, parse_frames

__all__ = [
    "ColourLookup",
    "Footage",
    "FootageAnalysis",
    "FootageInfo",
    "Frame",
    "analyse_footage",
    "colour_index",
    "compile_float_lookup",
    "compile_lookup",
    "demo_frames",
    "frame_decisions",
    "open_footage",
    "parse_frames",
    "write_demo_clip",
]
