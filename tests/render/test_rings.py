"""Rings around the few disagreeing pixels of the overlay: findable, and the decisions still decode exactly."""

from __future__ import annotations

import io

import numpy as np
import pytest
from PIL import Image

from fxnet_widgets.render.palette import FIXED_ONLY, FLOAT_ONLY, MARK_INNER, MARK_OUTER
from fxnet_widgets.render.raster import MAX_RINGED, overlay_png, ring_mask


def _rgb(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))


def _is(rgb: np.ndarray, colour: tuple[int, int, int]) -> np.ndarray:
    return (rgb == np.array(colour, np.uint8)).all(axis=-1)


def test_ring_mask_is_the_annulus_by_distance():
    m = ring_mask(np.array([[10, 12]]), (21, 25), 4, 2)
    yy, xx = np.mgrid[0:21, 0:25]
    d2 = (yy - 10) ** 2 + (xx - 12) ** 2
    assert np.array_equal(m, (d2 <= 16) & (d2 > 4))  # 2 < distance <= 4, computed here directly
    # a boolean mask of points gives the same rings; rings are clipped at the border
    pts = np.zeros((21, 25), bool)
    pts[10, 12] = pts[0, 0] = True
    both = ring_mask(pts, (21, 25), 4, 2)
    assert both[m].all() and both[0, 3] and not both[0, 0]


def test_rings_keep_the_decisions_exact_and_circle_each_difference():
    rng = np.random.default_rng(2)
    img = rng.integers(0, 256, (180, 320, 3)).astype(np.uint8)
    fl = np.zeros((180, 320), np.int64)
    fx = fl.copy()
    fx[20, 30] = 1  # only fixed point says target
    fl[150, 300] = 1  # only float says target
    fx[90, 160] = fl[90, 160] = 1  # agree
    rgb = _rgb(overlay_png(img, fx, fl, 2, rings=True))
    assert np.array_equal(_is(rgb, FIXED_ONLY), (fx == 1) & (fl == 0))
    assert np.array_equal(_is(rgb, FLOAT_ONLY), (fx == 0) & (fl == 1))
    ringed = _is(rgb, MARK_INNER)
    edged = _is(rgb, MARK_OUTER)
    radius = round(320 / 40)
    for y, x in ((20, 30), (150, 300)):
        assert ringed[y - radius, x] and ringed[y, x + radius]  # white at the ring's radius
        assert edged[y - radius - 1, x]  # black just outside it
    assert not (ringed | edged)[90 - radius : 90 + radius, 160 - radius : 160 + radius].any()
    # without rings the picture is the plain overlay: same disagreement pixels, no white or black
    plain = _rgb(overlay_png(img, fx, fl, 2))
    assert not (_is(plain, MARK_INNER) | _is(plain, MARK_OUTER)).any()
    assert np.array_equal(_is(plain, FIXED_ONLY), _is(rgb, FIXED_ONLY))


def test_many_differences_are_not_ringed():
    img = np.full((40, 60, 3), 128, np.uint8)
    fx = np.zeros((40, 60), np.int64)
    fx.reshape(-1)[: MAX_RINGED + 1] = 1
    rgb = _rgb(overlay_png(img, fx, np.zeros_like(fx), 2, rings=True))
    assert not _is(rgb, MARK_INNER).any()
    assert int(_is(rgb, FIXED_ONLY).sum()) == MAX_RINGED + 1


def test_ring_mask_refuses_bad_sizes():
    with pytest.raises(ValueError, match=r"^radius must be a positive integer, not 0$"):
        ring_mask(np.zeros((0, 2)), (4, 4), 0)
    with pytest.raises(ValueError, match=r"^width must be an integer between 1 and radius 3, not 4$"):
        ring_mask(np.zeros((0, 2)), (4, 4), 3, 4)
