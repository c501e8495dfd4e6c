"""The truecolour PNG writer of the live views (render/raster.py ``rgb_png``), decoded by Pillow."""

import io

import numpy as np
import pytest
from PIL import Image

from fxnet_widgets.render.cube import cube_png, render_cube
from fxnet_widgets.render.raster import rgb_png


@pytest.mark.parametrize("shape", [(1, 1), (7, 13), (256, 256)])
@pytest.mark.parametrize("level", [0, 1])
def test_pillow_decodes_the_same_pixels(shape, level):
    img = np.random.default_rng(sum(shape)).integers(0, 256, (*shape, 3), dtype=np.uint8)
    data = rgb_png(img, level)
    # PNG signature, then IHDR (PNG specification, W3C / ISO/IEC 15948, sections 5.2 and 11.2.2)
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    im = Image.open(io.BytesIO(data))
    assert im.mode == "RGB" and im.size == (shape[1], shape[0])
    assert np.array_equal(np.asarray(im), img)


def test_cube_png_is_the_rendered_picture_at_every_level():
    rng = np.random.default_rng(4)
    fixed = rng.integers(0, 2, (8, 8, 8))
    float_ = fixed.copy()
    float_[rng.random((8, 8, 8)) < 0.1] ^= 1
    want = render_cube(fixed, float_, 128, 2)
    for level in (1, 6):
        assert np.array_equal(np.asarray(Image.open(io.BytesIO(cube_png(fixed, float_, 128, 2, level)))), want)
    with pytest.raises(ValueError, match="compress_level"):
        cube_png(fixed, float_, 128, 2, 12)
