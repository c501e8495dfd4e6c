"""The live views' own indexed-colour PNG writer, the overlay background and the cube's culling."""

import io
import struct

import numpy as np
import pytest
from PIL import Image

from fxnet_widgets.render import cube as cube_mod
from fxnet_widgets.render.cube import render_cube
from fxnet_widgets.render.raster import overlay_background, overlay_png, palette_png


@pytest.mark.parametrize("n_colours, depth", [(1, 1), (2, 1), (3, 2), (4, 2), (5, 4), (16, 4), (17, 8), (256, 8)])
@pytest.mark.parametrize("width", [1, 7, 9, 33])
def test_live_palette_png_decodes_to_the_indices_and_colours(n_colours, depth, width):
    rng = np.random.default_rng(n_colours * 100 + width)
    idx = rng.integers(0, n_colours, (5, width))
    pal = rng.integers(0, 256, (n_colours, 3)).astype(np.uint8)
    for level in (0, 1):
        png = palette_png(idx, pal, level)
        # PNG specification (W3C, ISO/IEC 15948): signature, then IHDR with
        # width, height, bit depth, colour type 3 (indexed colour)
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
        w, h, bit_depth, colour_type = struct.unpack(">IIBB", png[16:26])
        assert (w, h, bit_depth, colour_type) == (width, 5, depth, 3)
        im = Image.open(io.BytesIO(png))  # pillow (its documentation: PNG reading) as the outside decoder
        assert np.array_equal(np.asarray(im), idx)
        assert np.array_equal(np.asarray(im.convert("RGB")), pal[idx])


def test_report_level_palette_png_still_decodes_the_same():
    idx = np.arange(12).reshape(3, 4) % 3
    pal = np.array([[1, 2, 3], [40, 50, 60], [200, 100, 0]], dtype=np.uint8)
    live, report = palette_png(idx, pal, 1), palette_png(idx, pal, 6)
    assert np.array_equal(np.asarray(Image.open(io.BytesIO(live)).convert("RGB")),
                          np.asarray(Image.open(io.BytesIO(report)).convert("RGB")))  # fmt: skip


def test_overlay_background_is_dimmed_bt601_luminance():
    img = np.random.default_rng(1).integers(0, 256, (6, 9, 3)).astype(np.uint8)
    bg = overlay_background(img)
    # ITU-R BT.601 luma weights 0.299, 0.587, 0.114 (as integers per mille), in 64 steps
    lum = [[(299 * int(p[0]) + 587 * int(p[1]) + 114 * int(p[2])) * 64 // 256000 for p in row] for row in img]
    assert bg.tolist() == lum and bg.dtype == np.uint8 and not bg.flags.writeable
    fx = np.random.default_rng(2).integers(0, 2, (6, 9))
    fl = np.zeros((6, 9), dtype=np.int64)
    a = Image.open(io.BytesIO(overlay_png(img, fx, fl, 2, rings=True))).convert("RGB")
    b = Image.open(io.BytesIO(overlay_png(img, fx, fl, 2, rings=True, background=bg))).convert("RGB")
    assert np.array_equal(np.asarray(a), np.asarray(b))


def test_overlay_background_of_another_shape_is_refused():
    img = np.zeros((4, 5, 3), np.uint8)
    msg = r"^background must be the image's H x W uint8 grey index, not uint8 \(5, 4\)$"
    with pytest.raises(ValueError, match=msg):
        overlay_png(img, np.zeros((4, 5), int), np.zeros((4, 5), int), background=np.zeros((5, 4), np.uint8))


def _painted_one_by_one(fx, fl, size):
    """The cube picture with every disagreeing voxel painted in turn, farthest level first."""
    n = fx.shape[0]
    geo = cube_mod._geometry(n, size)
    ref = render_cube(np.zeros_like(fx), np.zeros_like(fx), size)  # background, edges and letters
    diff = np.flatnonzero(fx.reshape(-1) != fl.reshape(-1))
    canvas = {}
    for v in sorted(diff.tolist(), key=lambda v: (int(geo.level[v]), v)):
        c = np.array(cube_mod.FIXED_ONLY if fx.reshape(-1)[v] > fl.reshape(-1)[v] else cube_mod.FLOAT_ONLY)
        inner = np.clip(c * geo.shade[v], 0, 255).astype(np.uint8)
        rim = np.clip(c * geo.shade[v] * 0.78, 0, 255).astype(np.uint8)
        for off, on_edge in zip(geo.offsets.tolist(), geo.edge.tolist()):
            canvas[int(geo.base[v]) + off] = rim if on_edge else inner
    return ref, canvas, geo


def test_cube_with_hidden_voxels_culled_equals_painting_every_voxel():
    rng = np.random.default_rng(4)
    n, size = 6, 64
    fx = rng.integers(0, 2, (n, n, n))
    fl = np.where(rng.random((n, n, n)) < 0.6, 1 - fx, fx)  # dense: many voxels behind others
    got = render_cube(fx, fl, size)
    ref, canvas, geo = _painted_one_by_one(fx, fl, size)
    expected = np.array(geo.back)
    agree_pos = (fx.reshape(-1) == fl.reshape(-1)) & (fx.reshape(-1) != 0)
    ok = agree_pos & geo.dot_ok
    faint = (np.array(cube_mod.AGREE_POSITIVE, dtype=np.float64) * 0.7 + np.array(cube_mod._BACKGROUND) * 0.3)
    expected[geo.dot_y[ok], geo.dot_x[ok]] = faint.astype(np.uint8)
    drawn = 0
    for pos, colour in canvas.items():
        y, x = divmod(pos, geo.side)
        y, x = y - geo.pad, x - geo.pad
        if 0 <= y < size and 0 <= x < size:
            expected[y, x] = colour
            drawn += 1
    assert drawn > 200
    # the front edges and letters are drawn on top: compare everywhere else
    free = (ref == geo.back).all(axis=-1)
    assert free.mean() > 0.8
    assert np.array_equal(got[free], expected[free])
