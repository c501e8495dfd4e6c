"""Legends with the network's class names: class colours, and what the "where they differ" colours mean."""

from __future__ import annotations

import html
from collections.abc import Sequence

from ..render.palette import DISAGREE, FIXED_ONLY, FLOAT_ONLY, class_colours, hex_colour

__all__ = ["swatch", "class_legend_html", "difference_legend_html"]


def swatch(colour: str, text: str) -> str:
    """One legend item: a 12 px square of ``colour`` and the (escaped) text."""
    return (
        f"<span style='white-space:nowrap;margin-right:12px'><span style='display:inline-block;width:12px;"
        f"height:12px;background:{colour};margin-right:4px;vertical-align:middle;border:1px solid #999'></span>"
        f"{html.escape(text)}</span>"
    )


def _row(items: list[str]) -> str:
    return "<div style='font-size:12px;line-height:20px;display:flex;flex-wrap:wrap'>" + "".join(items) + "</div>"


def class_legend_html(classes: Sequence[str]) -> str:
    """Each class's colour in the decision pictures, with its name.

    >>> class_legend_html(["other", "ripe"]).count("background:")
    2
    """
    return _row([swatch(hex_colour(c), name) for c, name in zip(class_colours(len(classes)), classes)])


def difference_legend_html(classes: Sequence[str]) -> str:
    """What the disagreement colours mean (binary: which side says the second class; several: any)."""
    if len(classes) == 2:
        target = classes[1]
        items = [swatch(hex_colour(FIXED_ONLY), f"only fixed point says {target}"),
                 swatch(hex_colour(FLOAT_ONLY), f"only float says {target}")]  # fmt: skip
    else:
        items = [swatch(hex_colour(DISAGREE), "fixed point and float choose different classes")]
    return _row(items)
