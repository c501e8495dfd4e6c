"""Pictures as PNG bytes: numpy + pillow only (no widget library).

Decision masks, the disagreement overlay, downscaling for a live preview, an
isometric picture of the RGB cube and small bar/histogram charts for static
reports. The widgets show these bytes in ``ipywidgets.Image``; reports embed them.
"""

from .charts import bar_chart_png, histogram_png
from .cube import cube_png, render_cube
from .palette import (
    AGREE_NEGATIVE,
    AGREE_POSITIVE,
    FIXED_ONLY,
    FLOAT_ONLY,
    class_colours,
    slice_legend_names,
    slice_palette,
)
from .raster import (
    MAX_PREVIEW_WIDTH,
    DownscaledImage,
    comparison_codes,
    decision_mask_png,
    downscale,
    overlay_png,
    palette_png,
    png_bytes,
)

__all__ = [
    "AGREE_NEGATIVE",
    "AGREE_POSITIVE",
    "FIXED_ONLY",
    "FLOAT_ONLY",
    "MAX_PREVIEW_WIDTH",
    "DownscaledImage",
    "bar_chart_png",
    "class_colours",
    "comparison_codes",
    "cube_png",
    "decision_mask_png",
    "downscale",
    "histogram_png",
    "overlay_png",
    "palette_png",
    "png_bytes",
    "render_cube",
    "slice_legend_names",
    "slice_palette",
]
