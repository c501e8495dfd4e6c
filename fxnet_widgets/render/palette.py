"""The colours of every picture (one place, so masks, heat maps and cube agree).

A binary classifier's pictures use four colours: both say "other", both say
"target", only the fixed-point network says "target", only the float network
says "target". Several classes get one colour each plus one for disagreement.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = [
    "AGREE_NEGATIVE",
    "AGREE_POSITIVE",
    "FIXED_ONLY",
    "FLOAT_ONLY",
    "DISAGREE",
    "MARK_INNER",
    "MARK_OUTER",
    "class_colours",
    "slice_palette",
    "hex_colour",
]

AGREE_NEGATIVE = (36, 40, 52)  # slate: both say "other"
AGREE_POSITIVE = (242, 183, 5)  # amber: both say "target" (ripe fruit)
FIXED_ONLY = (214, 45, 123)  # magenta: fixed point says target, float does not
FLOAT_ONLY = (26, 170, 190)  # teal: float says target, fixed point does not
DISAGREE = (214, 45, 123)  # several classes: any disagreement
MARK_INNER = (255, 255, 255)  # white: ring drawn around a disagreeing pixel (inside)
MARK_OUTER = (0, 0, 0)  # black: edge of that ring (visible on light and dark backgrounds alike)
_EXTRA = [
    (87, 148, 74),
    (122, 90, 200),
    (230, 110, 40),
    (150, 150, 150),
    (70, 120, 200),
    (200, 80, 80),
]


def class_colours(n_classes: int) -> np.ndarray:
    """``(n_classes, 3)`` uint8 colours of the classes (binary: slate, amber)."""
    if not isinstance(n_classes, (int, np.integer)) or n_classes < 2:
        raise ValueError(f"n_classes must be an integer >= 2, not {n_classes!r}")
    base = [AGREE_NEGATIVE, AGREE_POSITIVE, *_EXTRA]
    cols = [base[i % len(base)] for i in range(int(n_classes))]
    return np.array(cols, dtype=np.uint8)


def slice_legend_names(classes: Sequence[str]) -> list[str]:
    """What each colour of :func:`slice_palette` means, for these class names (in order).

    >>> slice_legend_names(["other", "ripe"])
    ['both other', 'both ripe', 'only fixed point: ripe', 'only float: ripe']
    """
    if len(classes) == 2:
        return [f"both {classes[0]}", f"both {classes[1]}", f"only fixed point: {classes[1]}",
                f"only float: {classes[1]}"]  # fmt: skip
    return [f"both {c}" for c in classes] + ["they disagree"]


def slice_palette(n_classes: int) -> np.ndarray:
    """Colours of the comparison codes of :func:`~fxnet_widgets.render.comparison_codes`.

    Binary: ``[both other, both target, fixed only, float only]``. Several
    classes: one per class (agreement on that class) and one for disagreement.
    """
    if n_classes == 2:
        return np.array([AGREE_NEGATIVE, AGREE_POSITIVE, FIXED_ONLY, FLOAT_ONLY], dtype=np.uint8)
    return np.vstack([class_colours(n_classes), np.array([DISAGREE], dtype=np.uint8)])


def hex_colour(rgb: tuple[int, int, int] | np.ndarray) -> str:
    """``#rrggbb`` of an RGB triple."""
    r, g, b = (int(v) for v in rgb)
    return f"#{r:02x}{g:02x}{b:02x}"
