"""The cube picture's compiled painter against the numpy painter (the reference path), and the
precomputed overlay against pillow drawing it.

Every pixel must be equal (the numpy painter writes the squares level by level, nearer later;
the compiled one nearest first, each pixel once), on random grids of every size and disagreement density,
two classes and three, including small pictures where squares of one level overlap.
"""

from __future__ import annotations

import numpy as np
import pytest
from PIL import Image, ImageDraw

from fxnet_widgets.render import cube
from fxnet_widgets.render.cube import render_cube


@pytest.mark.parametrize("seed", range(6))
def test_compiled_painter_draws_the_numpy_painters_pixels(monkeypatch: pytest.MonkeyPatch, seed: int):
    rng = np.random.default_rng(seed)
    for _ in range(12):
        n = int(rng.choice([2, 3, 8, 16, 32]))
        size = int(rng.choice([64, 100, 256]))
        k = int(rng.choice([2, 3]))
        fx = rng.integers(0, k, (n, n, n))
        fl = fx.copy()
        flip = rng.random((n, n, n)) < rng.choice([0.002, 0.05, 0.5, 1.0])
        fl[flip] = rng.integers(0, k, int(flip.sum()))
        monkeypatch.setenv("FXNET_KERNEL", "numpy")
        ref = render_cube(fx, fl, size, k)
        monkeypatch.setenv("FXNET_KERNEL", "numba")
        got = render_cube(fx, fl, size, k)
        assert np.array_equal(ref, got), (n, size, k, int((ref != got).any(axis=2).sum()))
        # the painting did something where they differ (else the comparison proves little)
        if (fx != fl).any():
            assert (ref != render_cube(fx, fx, size, k)).any()


@pytest.mark.parametrize("size", [64, 100, 256, 300])
def test_overlay_is_what_pillow_draws_over_any_picture(size: int):
    # reference: pillow itself drawing the front edges and the axis letters on the picture (as the
    # picture was drawn before the overlay was precomputed): the blended letter pixels depend on
    # what lies under them, so the check runs over random pictures
    geo = cube._geometry(8, size)
    rng = np.random.default_rng(size)
    for _ in range(5):
        under = rng.integers(0, 256, (size, size, 3), dtype=np.uint8)
        pil = Image.fromarray(under.copy())
        draw = ImageDraw.Draw(pil)
        for seg in geo.front:
            draw.line(seg, fill=cube._EDGE, width=1)
        for label, xy, col in cube._letter_spots(geo.corners):
            draw.text(xy, label, fill=col)
        got = under.copy()
        cube._draw_overlay(got, geo)
        assert np.array_equal(np.asarray(pil), got)
        assert (got != under).any()
