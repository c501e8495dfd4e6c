"""An isometric picture of the whole RGB cube: where fixed point and float disagree.

The picture is drawn with numpy (a painter's algorithm over small squares, one per voxel;
compiled once the kernel's loops are loaded) and pillow (the cube's edges and axis letters,
drawn once per picture size and blended in as pillow blends them). Agreeing "target" voxels are
faint amber dots, so the shape of the target region stays visible; voxels where
the decisions differ are solid squares (magenta: only fixed point says target,
teal: only float), shaded darker with depth.
"""

from __future__ import annotations

import functools
import io
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from PIL import Image, ImageDraw

from ._paint import compiled, paint_numpy
from .palette import AGREE_POSITIVE, DISAGREE, FIXED_ONLY, FLOAT_ONLY
from .raster import _check_level, rgb_png

__all__ = ["render_cube", "cube_png"]

_BACKGROUND = (250, 250, 247)
_EDGE = (120, 120, 120)
_COS30 = math.cos(math.pi / 6)


def _project(r: np.ndarray, g: np.ndarray, b: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray]:
    """Screen x, y (pixels, float) of cube points in [0, 1]^3 seen from (1, 1, 1)."""
    scale = size / 2.3
    x = (r - g) * _COS30 * scale + size / 2
    y = ((r + g) * 0.5 - b) * scale + size / 2  # screen up is (2b - r - g) / sqrt(6), rescaled
    return x, y


def _segments(size: int) -> tuple[dict, list, list]:
    """Projected cube corners and the edges: (corners, hidden edges, front edges)."""
    corners = {
        (a, b_, c_): _project(np.array([a]), np.array([b_]), np.array([c_]), size)
        for a in (0, 1)
        for b_ in (0, 1)
        for c_ in (0, 1)
    }
    hidden, front = [], []
    for q in corners:
        for axis in range(3):
            if q[axis] == 1:
                continue
            q2 = list(q)
            q2[axis] = 1
            p0, p1 = corners[q], corners[tuple(q2)]
            seg = [(float(p0[0][0]), float(p0[1][0])), (float(p1[0][0]), float(p1[1][0]))]
            # the three edges of the far (black) corner lie behind everything
            (hidden if q == (0, 0, 0) else front).append(seg)
    return corners, hidden, front


@dataclass(frozen=True, eq=False)
class _Geometry:
    """Everything of the picture that depends on the grid size and picture size only."""

    corners: dict
    front: list
    back: np.ndarray  # background with the hidden edges (read-only)
    dot_x: np.ndarray  # per voxel, rounded screen position of its dot
    dot_y: np.ndarray
    dot_ok: np.ndarray
    level: np.ndarray  # i + j + k: larger is nearer the viewer at (1, 1, 1)
    shade: np.ndarray  # (voxels, 1)
    base: np.ndarray  # per voxel, the square's centre on the padded canvas
    offsets: np.ndarray
    edge: np.ndarray
    pad: int
    side: int
    lines: np.ndarray  # flat pixel indices of the front edges
    letters: tuple  # per axis letter: (flat pixel indices, coverage, colour)
    inner: np.ndarray  # (3, voxels) packed 0xRRGGBB square colours, shaded: fixed only, float only, differ
    rim: np.ndarray  # and their darker rims
    oy: np.ndarray  # a square's pixels around its centre (row, column offsets; ``offsets`` flattened)
    ox: np.ndarray
    by_order: Any  # _ByOrder


@functools.lru_cache(maxsize=8)
def _geometry(n: int, size: int) -> _Geometry:
    corners, hidden, front = _segments(size)
    back = Image.new("RGB", (size, size), _BACKGROUND)
    for seg in hidden:
        ImageDraw.Draw(back).line(seg, fill=(200, 200, 200), width=1)
    img = np.array(back)
    i, j, k = np.indices((n, n, n)).reshape(3, -1)
    pos = (np.stack([i, j, k]).astype(np.float64) + 0.5) / n
    x, y = _project(*pos, size)
    xi, yi = np.rint(x).astype(np.int64), np.rint(y).astype(np.int64)
    ok = (xi >= 0) & (xi < size) & (yi >= 0) & (yi < size)
    level = i + j + k
    half = max(1, int(round(size / (2.3 * n) * 0.6)))
    off = np.arange(-half, half + 1)
    ox, oy = (v.reshape(-1) for v in np.meshgrid(off, off))
    edge = (np.abs(ox) == half) | (np.abs(oy) == half)  # square edges darker: separate voxels
    shade = (0.6 + 0.4 * level / (3.0 * (n - 1)))[:, None]
    pad = half + 1
    side = size + 2 * pad
    base = (
        (np.clip(yi, -pad + half, size + pad - half - 1) + pad) * side
        + np.clip(xi, -pad + half, size + pad - half - 1)
        + pad
    )
    offsets = oy * side + ox
    # the squares' centres on the picture (row, column), as base holds them on the padded canvas
    sq_y = np.clip(yi, -pad + half, size + pad - half - 1)
    sq_x = np.clip(xi, -pad + half, size + pad - half - 1)
    lines, letters = _overlay(corners, front, size)
    order = np.argsort(level, kind="stable")  # the painter's order: by depth level, then voxel index
    colours = np.array([FIXED_ONLY, FLOAT_ONLY, DISAGREE], dtype=np.int64)
    inner = np.stack([_packed(c * shade) for c in colours])
    rim = np.stack([_packed(c * shade * 0.78) for c in colours])
    oy, ox = np.ascontiguousarray(oy, dtype=np.int64), np.ascontiguousarray(ox, dtype=np.int64)
    # for the compiled painter: what it reads per voxel, in painting order and small types (read once
    # a picture, from memory other work has just filled: the bytes read are most of its time)
    dot_pixel = np.where(ok, yi * size + xi, 0).astype(np.int32)
    small = [order.astype(np.int32), base[order].astype(np.int32), sq_y[order].astype(np.int32),
             sq_x[order].astype(np.int32), np.ascontiguousarray(inner[:, order]), np.ascontiguousarray(rim[:, order]),
             dot_pixel]  # fmt: skip
    by_order = _ByOrder(*small)
    for a in (img, xi, yi, ok, level, shade, base, offsets, edge, lines, inner, rim, oy, ox, *small):
        a.setflags(write=False)
    return _Geometry(corners, front, img, xi, yi, ok, level, shade, base, offsets, edge, pad, side, lines, letters,
                     inner, rim, oy, ox, by_order)  # fmt: skip


@dataclass(frozen=True, eq=False)
class _ByOrder:
    """The compiled painter's per-voxel arrays, in painting order (``order``), and the dots' pixels."""

    voxel: np.ndarray  # the voxel index
    base: np.ndarray
    sq_y: np.ndarray
    sq_x: np.ndarray
    inner: np.ndarray  # (3, voxels)
    rim: np.ndarray
    dot_pixel: np.ndarray  # per voxel (index order), the flat pixel of its dot (0 where off the picture)


def _packed(rgb: np.ndarray) -> np.ndarray:
    """(voxels, 3) float RGB as one uint32 ``0xRRGGBB`` each (one store per pixel)."""
    c = np.clip(rgb, 0, 255).astype(np.uint32)
    return (c[:, 0] << 16) | (c[:, 1] << 8) | c[:, 2]


_FAINT = (np.array(AGREE_POSITIVE, dtype=np.float64) * 0.7 + np.array(_BACKGROUND) * 0.3).astype(np.uint8)


def _letter_spots(corners: dict) -> list[tuple[str, tuple[float, float], tuple[int, int, int]]]:
    """The axis letters: text, position and colour (beside the red, green and blue corners)."""
    spots = []
    for label, q, col in (("R", (1, 0, 0), (200, 40, 40)), ("G", (0, 1, 0), (30, 140, 40)),
                          ("B", (0, 0, 1), (40, 70, 200))):  # fmt: skip
        x0, y0 = corners[q]
        spots.append((label, (float(x0[0]) + (4 if label == "R" else -12 if label == "G" else 4), float(y0[0]) - 6),
                      col))  # fmt: skip
    return spots


def _overlay(corners: dict, front: list, size: int) -> tuple[np.ndarray, tuple]:
    """What pillow draws over the squares, as pixels: the front edges' flat indices, and per axis
    letter its pixels' flat indices, coverage (0-255) and colour.

    Drawn once per geometry on a blank ``L`` picture with ink 255, where pillow's blend gives the
    coverage itself; :func:`_draw_overlay` then blends as pillow does on RGB (tests compare both).
    """
    mask = Image.new("L", (size, size), 0)
    draw = ImageDraw.Draw(mask)
    for seg in front:
        draw.line(seg, fill=255, width=1)
    lines = np.flatnonzero(np.asarray(mask).reshape(-1))
    letters = []
    for label, xy, col in _letter_spots(corners):
        one = Image.new("L", (size, size), 0)
        ImageDraw.Draw(one).text(xy, label, fill=255)
        cover = np.asarray(one).reshape(-1)
        px = np.flatnonzero(cover)
        a = cover[px].astype(np.uint32)[:, None]
        for arr in (px, a):
            arr.setflags(write=False)
        letters.append((px, a, np.array(col, dtype=np.uint32)))
    return lines, tuple(letters)


def _draw_overlay(img: np.ndarray, geo: _Geometry) -> None:
    """The front edges (set to the edge colour) and the axis letters (blended by coverage) on ``img``,
    the pixels pillow's ``ImageDraw.line`` and ``text`` give."""
    flat = img.reshape(-1, 3)
    flat[geo.lines] = _EDGE
    for px, a, col in geo.letters:
        # pillow's blend of ink over a pixel by coverage a: DIV255(under * (255 - a) + ink * a)
        t = flat[px].astype(np.uint32) * (255 - a) + col[None, :] * a + 128
        flat[px] = ((t >> 8) + t) >> 8


def _voxels_numpy(img: np.ndarray, geo: _Geometry, fxf: np.ndarray, flf: np.ndarray, n_classes: int) -> None:
    """The faint dots and the squares where the decisions differ, by numpy (the reference painter)."""
    diff = fxf != flf
    # faint dots: agreeing target voxels (binary) / non-zero classes
    agree_pos = (~diff) & (fxf != 0)
    if agree_pos.any():
        ok = geo.dot_ok[agree_pos]
        img[geo.dot_y[agree_pos][ok], geo.dot_x[agree_pos][ok]] = _FAINT
    if not diff.any():
        return
    where = np.flatnonzero(diff)
    level = geo.level[where]
    base = geo.base[where]
    # a square drawn later on exactly the same footprint (the same view ray, nearer)
    # overwrites all of an earlier one: only the nearest level of each footprint is drawn
    nearest = np.full(geo.side * geo.side, -1, dtype=np.int64)
    np.maximum.at(nearest, base, level)
    keep = level == nearest[base]
    where, level, base = where[keep], level[keep], base[keep]
    kind = np.where(fxf[where] > flf[where], 0, 1) if n_classes == 2 else np.full(where.size, 2)
    inner, rim = geo.inner[kind, where], geo.rim[kind, where]
    # painter's algorithm by depth level: nearer levels drawn later
    order = np.argsort(level, kind="stable")
    paint_numpy(img, geo.pad, geo.side, base[order], level[order], geo.offsets, geo.edge, inner[order], rim[order])


def render_cube(fixed: Any, float_: Any, size: int = 256, n_classes: int = 2) -> np.ndarray:
    """The isometric picture (size x size x 3 uint8) of an (n, n, n) decision grid.

    ``fixed[i, j, k]`` and ``float_[i, j, k]`` are the decisions at red index i,
    green j, blue k of a regular grid over the cube (black corner at index 0).
    """
    fx = np.asarray(fixed)
    fl = np.asarray(float_)
    if fx.ndim != 3 or fx.shape != fl.shape or len(set(fx.shape)) != 1 or fx.shape[0] < 2:
        raise ValueError(f"fixed and float must be (n, n, n) arrays of one shape, not {fx.shape} and {fl.shape}")
    if not isinstance(size, (int, np.integer)) or not 64 <= size <= 2048:
        raise ValueError(f"size must be an integer between 64 and 2048, not {size!r}")
    n = fx.shape[0]
    geo = _geometry(int(n), int(size))
    img = geo.back.copy()
    fxf, flf = fx.reshape(-1), fl.reshape(-1)
    loop = compiled()
    if loop is not None:  # dots and squares in one compiled pass (the same pixels: tests compare)
        bo = geo.by_order
        loop(img.reshape(-1), size, fxf, flf, _FAINT, bo.dot_pixel, geo.dot_ok, bo.voxel, geo.side, bo.base, bo.sq_y,
             bo.sq_x, geo.oy, geo.ox, geo.edge, bo.inner, bo.rim, n_classes == 2)  # fmt: skip
    else:
        _voxels_numpy(img, geo, fxf, flf, n_classes)
    _draw_overlay(img, geo)
    return img


def cube_png(fixed: Any, float_: Any, size: int = 256, n_classes: int = 2, compress_level: int = 1) -> bytes:
    """PNG bytes of :func:`render_cube`."""
    level = _check_level(compress_level)
    img = render_cube(fixed, float_, size, n_classes)
    if level <= 1:  # live views: written here, no row-filter search
        return rgb_png(img, level)
    buf = io.BytesIO()
    Image.fromarray(img).save(buf, format="PNG", compress_level=level)
    return buf.getvalue()
