"""Decision masks, disagreement overlay and preview downscaling as PNG bytes.

Masks are palette PNGs (one byte per pixel): small and fast to encode, and they
decode (``Image.open(...).convert("RGB")``) to exactly the palette colour of
each pixel's decision, so a test can read the decisions back.

>>> import io
>>> from PIL import Image
>>> png = decision_mask_png(np.array([[0, 1]]), 2)
>>> np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).tolist()
[[[36, 40, 52], [242, 183, 5]]]
"""

from __future__ import annotations

import functools
import io
import struct
import zlib
from dataclasses import dataclass
from typing import Any

import numpy as np
from PIL import Image

from .palette import FIXED_ONLY, FLOAT_ONLY, MARK_INNER, MARK_OUTER, class_colours

__all__ = [
    "MAX_PREVIEW_WIDTH",
    "DownscaledImage",
    "comparison_codes",
    "decision_mask_png",
    "downscale",
    "MAX_RINGED",
    "ring_mask",
    "overlay_background",
    "overlay_png",
    "palette_png",
    "png_bytes",
]

#: widest live preview (pixels); wider images are subsampled by a whole factor
MAX_PREVIEW_WIDTH = 640
_GREY_LEVELS = 64  # overlay background: dimmed luminance in this many palette steps
#: with at most this many disagreeing pixels the overlay can ring each one (more are visible anyway)
MAX_RINGED = 500


def _check_level(compress_level: Any) -> int:
    if not isinstance(compress_level, (int, np.integer)) or not 0 <= compress_level <= 9:
        raise ValueError(f"compress_level must be an integer between 0 and 9, not {compress_level!r}")
    return int(compress_level)


def png_bytes(codes: Any, compress_level: int = 1) -> bytes:
    """PNG bytes of an H x W x 3 (RGB) or H x W (grey) uint8 array.

    ``compress_level`` 1 is fast (live views); 6 is smaller (reports).
    """
    arr = np.asarray(codes)
    if arr.dtype != np.uint8:
        raise TypeError(f"image must be a uint8 array, not {arr.dtype}")
    if not (arr.ndim == 2 or (arr.ndim == 3 and arr.shape[2] == 3)) or arr.size == 0:
        raise ValueError(f"image must be H x W or H x W x 3 with pixels, not shape {arr.shape}")
    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(arr)).save(buf, format="PNG", compress_level=_check_level(compress_level))
    return buf.getvalue()


#: zlib strategies (the deflate stream differs, the decoded pixels do not)
_Z_DEFAULT, _Z_HUFFMAN_ONLY = -1, 2  # -1: pillow's default


def _png_chunk(kind: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


def _indexed_png(idx: np.ndarray, pal: np.ndarray, level: int, strategy: int) -> bytes:
    """An indexed-colour PNG (colour type 3) of H x W palette indices, per the PNG
    specification (W3C / ISO/IEC 15948): 1, 2, 4 or 8 bits per pixel (the fewest
    that hold the palette), rows packed most significant bits first, filter 0.
    """
    h, w = idx.shape
    n = pal.shape[0]
    depth = 1 if n <= 2 else 2 if n <= 4 else 4 if n <= 16 else 8
    if depth == 8:
        rows = idx
    elif depth == 1:
        rows = np.packbits(idx, axis=1)  # indices are 0 or 1 here
    else:
        per = 8 // depth
        padded = np.zeros((h, -(-w // per) * per), dtype=np.uint8)
        padded[:, :w] = idx
        groups = padded.reshape(h, -1, per)
        rows = np.zeros(groups.shape[:2], dtype=np.uint8)
        for i in range(per):
            rows |= groups[:, :, i] << np.uint8(8 - depth * (i + 1))
    raw = np.empty((h, rows.shape[1] + 1), dtype=np.uint8)
    raw[:, 0] = 0  # filter type 0 (none) on every row
    raw[:, 1:] = rows
    z = zlib.compressobj(level, zlib.DEFLATED, 15, 8, zlib.Z_DEFAULT_STRATEGY if strategy < 0 else strategy)
    data = z.compress(raw.tobytes()) + z.flush()
    return b"".join((
        b"\x89PNG\r\n\x1a\n",
        _png_chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, depth, 3, 0, 0, 0)),
        _png_chunk(b"PLTE", np.ascontiguousarray(pal, dtype=np.uint8).tobytes()),
        _png_chunk(b"IDAT", data),
        _png_chunk(b"IEND", b""),
    ))  # fmt: skip


def rgb_png(img: np.ndarray, level: int) -> bytes:
    """A truecolour PNG (colour type 2, 8 bits a sample) of an H x W x 3 uint8 array, per the PNG
    specification (W3C / ISO/IEC 15948): filter 0 on every row, one deflate stream.

    For live views (``level`` 0 or 1): about a quarter of pillow's time on a 256 x 256
    picture (pillow also tries the row filters).
    """
    h, w, _ = img.shape
    raw = np.empty((h, 3 * w + 1), dtype=np.uint8)
    raw[:, 0] = 0  # filter type 0 (none)
    raw[:, 1:] = np.ascontiguousarray(img, dtype=np.uint8).reshape(h, 3 * w)
    z = zlib.compressobj(level, zlib.DEFLATED, 15, 8, zlib.Z_DEFAULT_STRATEGY)
    data = z.compress(raw.tobytes()) + z.flush()
    return b"".join((
        b"\x89PNG\r\n\x1a\n",
        _png_chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 2, 0, 0, 0)),
        _png_chunk(b"IDAT", data),
        _png_chunk(b"IEND", b""),
    ))  # fmt: skip


def palette_png(index: Any, palette: Any, compress_level: int = 1, *, _strategy: int = _Z_DEFAULT) -> bytes:
    """PNG bytes of an H x W array of palette indices (< 256) and an (n, 3) uint8 palette."""
    idx = np.asarray(index)
    pal = np.asarray(palette)
    if idx.ndim != 2 or idx.size == 0:
        raise ValueError(f"index must be a non-empty H x W array, not shape {idx.shape}")
    if idx.dtype.kind not in "iu" or idx.dtype == np.bool_:
        raise TypeError(f"index must hold integers, not {idx.dtype}")
    if pal.ndim != 2 or pal.shape[1] != 3 or not 1 <= pal.shape[0] <= 256 or pal.dtype != np.uint8:
        raise ValueError(f"palette must be an (n, 3) uint8 array with 1 <= n <= 256, not {pal.dtype} {pal.shape}")
    lo, hi = int(idx.min()), int(idx.max())
    if lo < 0 or hi >= pal.shape[0]:
        raise ValueError(f"index must be between 0 and {pal.shape[0] - 1}, not {lo if lo < 0 else hi}")
    level = _check_level(compress_level)
    if level <= 1:  # live views: written here (packing few-colour pixels in numpy is much faster)
        return _indexed_png(np.ascontiguousarray(idx, dtype=np.uint8), pal, level, _strategy)
    im = Image.fromarray(np.ascontiguousarray(idx, dtype=np.uint8), mode="P")
    im.putpalette(pal.reshape(-1).tolist())
    buf = io.BytesIO()
    im.save(buf, format="PNG", compress_level=_check_level(compress_level), compress_type=_strategy)
    return buf.getvalue()


def decision_mask_png(decisions: Any, n_classes: int, compress_level: int = 1) -> bytes:
    """PNG of an H x W decision array, one colour per class (:func:`class_colours`)."""
    dec = np.asarray(decisions)
    return palette_png(dec, class_colours(n_classes), compress_level)


def comparison_codes(fixed: Any, float_: Any, n_classes: int) -> np.ndarray:
    """One small integer per element comparing fixed and float decisions (uint8).

    Binary (``n_classes == 2``): 0 both other, 1 both target, 2 only fixed point
    says target, 3 only float says target. Several classes: the agreed class,
    or ``n_classes`` where they disagree. Colours: :func:`slice_palette`.
    """
    fx = np.asarray(fixed)
    fl = np.asarray(float_)
    if fx.shape != fl.shape:
        raise ValueError(f"fixed and float decisions must have the same shape, not {fx.shape} and {fl.shape}")
    if n_classes == 2:
        out = np.where(fx == fl, fx, np.where(fx > fl, 2, 3))
    else:
        out = np.where(fx == fl, fx, n_classes)
    return out.astype(np.uint8)


def ring_mask(points: Any, shape: tuple[int, int], radius: int, width: int = 2) -> np.ndarray:
    """Boolean H x W mask of rings (annuli ``radius - width < d <= radius``) around ``points``.

    ``points`` is a boolean H x W mask or an (n, 2) array of (row, column); the
    rings are clipped at the border.

    >>> ring_mask(np.array([[2, 2]]), (5, 5), 2, 1).astype(int)[2].tolist()
    [1, 0, 0, 0, 1]
    """
    h, w = (int(v) for v in shape)
    out = np.zeros(h * w, dtype=bool)
    out[ring_pixels(points, (h, w), radius, width)] = True
    return out.reshape(h, w)


@functools.lru_cache(maxsize=16)
def _annulus(r: int, width: int) -> tuple[np.ndarray, np.ndarray]:
    dy, dx = np.mgrid[-r : r + 1, -r : r + 1]
    d2 = dy * dy + dx * dx
    keep = (d2 <= r * r) & (d2 > (r - width) ** 2)
    dy, dx = dy[keep], dx[keep]
    for a in (dy, dx):
        a.setflags(write=False)
    return dy, dx


def ring_pixels(points: Any, shape: tuple[int, int], radius: int, width: int = 2) -> np.ndarray:
    """The flat indices (row * W + column; repeats where rings overlap) of :func:`ring_mask`'s pixels."""
    h, w = (int(v) for v in shape)
    if not isinstance(radius, (int, np.integer)) or radius < 1:
        raise ValueError(f"radius must be a positive integer, not {radius!r}")
    if not isinstance(width, (int, np.integer)) or not 1 <= width <= radius:
        raise ValueError(f"width must be an integer between 1 and radius {radius}, not {width!r}")
    pts = np.asarray(points)
    if pts.dtype == np.bool_:
        if pts.shape != (h, w):
            raise ValueError(f"points mask must have shape {(h, w)}, not {pts.shape}")
        pts = np.argwhere(pts)
    pts = pts.reshape(-1, 2).astype(np.int64)
    dy, dx = _annulus(int(radius), int(width))
    ys = (pts[:, 0:1] + dy[None, :]).ravel()
    xs = (pts[:, 1:2] + dx[None, :]).ravel()
    ok = (ys >= 0) & (ys < h) & (xs >= 0) & (xs < w)
    return ys[ok] * w + xs[ok]


def overlay_background(codes: Any) -> np.ndarray:
    """The overlay's dimmed grey background of an H x W x 3 uint8 image: palette indices (uint8).

    It depends on the input only: a live view computes it once per image and
    passes it to :func:`overlay_png` as ``background``.
    """
    img = np.asarray(codes)
    if img.ndim != 3 or img.shape[2] != 3 or img.dtype != np.uint8:
        raise ValueError(f"image must be an H x W x 3 uint8 array, not {img.dtype} {img.shape}")
    # integer luminance (ITU-R BT.601 weights 299/587/114), dimmed to 0..~150
    lum = img[..., 0].astype(np.uint32) * 299
    lum += img[..., 1].astype(np.uint32) * 587
    lum += img[..., 2].astype(np.uint32) * 114
    lum *= _GREY_LEVELS  # at most 255000 * 64: fits uint32
    lum //= 1000 * 256
    out = lum.astype(np.uint8)
    out.setflags(write=False)
    return out


def overlay_png(
    codes: Any, fixed: Any, float_: Any, n_classes: int = 2, compress_level: int = 1, *, rings: bool = False,
    background: np.ndarray | None = None,
) -> bytes:
    """The input dimmed to grey with the disagreeing pixels coloured.

    Magenta: only the fixed-point network says target (or, with several
    classes, any disagreement); teal: only the float network says target.

    With ``rings`` and at most :data:`MAX_RINGED` disagreeing pixels, each one
    is also circled (white ring edged in black, radius about 1/40 of the
    width) so that a handful of pixels in a large picture can be found. Rings
    cover agreeing pixels only: every magenta and teal pixel is still exactly
    a disagreement, and every disagreement is still magenta or teal.

    ``background`` is :func:`overlay_background` of ``codes`` when the caller
    keeps it (computed here otherwise).
    """
    img = np.asarray(codes)
    fx = np.asarray(fixed)
    fl = np.asarray(float_)
    if img.ndim != 3 or img.shape[2] != 3 or img.dtype != np.uint8:
        raise ValueError(f"image must be an H x W x 3 uint8 array, not {img.dtype} {img.shape}")
    if fx.shape != img.shape[:2] or fl.shape != img.shape[:2]:
        raise ValueError(f"decisions must have the image's shape {img.shape[:2]}, not {fx.shape} and {fl.shape}")
    if background is None:
        idx = np.array(overlay_background(img))
    else:
        if background.shape != img.shape[:2] or background.dtype != np.uint8:
            raise ValueError(f"background must be the image's H x W uint8 grey index, not {background.dtype} "
                             f"{background.shape}")  # fmt: skip
        idx = background.copy()
    differ = fx != fl
    if rings:
        n = int(np.count_nonzero(differ))
        if 0 < n <= MAX_RINGED:
            h, w = differ.shape
            radius = max(3, round(max(h, w) / 40))
            at = np.flatnonzero(differ)  # (a 1-D search: about a tenth of argwhere's time on 640x360)
            pts = np.stack(np.divmod(at, w), axis=1)
            flat, free = idx.reshape(-1), ~differ.reshape(-1)  # rings cover agreeing pixels only
            outer = ring_pixels(pts, (h, w), radius + 1, 1)
            inner = ring_pixels(pts, (h, w), radius, max(1, radius // 4))
            flat[outer[free[outer]]] = _GREY_LEVELS + 3
            flat[inner[free[inner]]] = _GREY_LEVELS + 2
    # idx + differ * (mark - idx) in uint8 (mod 256): the mark where they differ, idx elsewhere; one
    # arithmetic pass instead of a boolean-mask store (measured about 10x faster on 640x360 here)
    d = differ.view(np.uint8)
    idx += d * (np.uint8(_GREY_LEVELS) - idx)
    if n_classes == 2:  # only float says target: the next palette entry (those pixels all differ)
        idx += ((fx == 0) & (fl == 1)).view(np.uint8)
    grey = (np.arange(_GREY_LEVELS, dtype=np.uint32) * 150 // (_GREY_LEVELS - 1) + 40).astype(np.uint8)
    marks = np.array([FIXED_ONLY, FLOAT_ONLY, MARK_INNER, MARK_OUTER], dtype=np.uint8)
    pal = np.vstack([np.repeat(grey[:, None], 3, axis=1), marks])
    # the grey background is noise to deflate: Huffman coding alone is faster and here also smaller
    return palette_png(idx, pal, compress_level, _strategy=_Z_HUFFMAN_ONLY)


@dataclass(frozen=True)
class DownscaledImage:
    """An image subsampled for a live preview (every ``factor``-th row and column)."""

    codes: np.ndarray
    factor: int
    full_shape: tuple[int, int]

    @property
    def downscaled(self) -> bool:
        return self.factor > 1

    @property
    def note(self) -> str:
        h, w = self.full_shape
        if self.factor == 1:
            return f"full resolution {w}x{h}"
        ph, pw = self.codes.shape[:2]
        return f"preview {pw}x{ph}: every {self.factor}th pixel of the {w}x{h} input"


def downscale(codes: Any, max_width: int = MAX_PREVIEW_WIDTH) -> DownscaledImage:
    """Keep every ``factor``-th pixel so the width is at most ``max_width``.

    Subsampling (not averaging) keeps real pixel colours, so the preview's
    decisions are decisions on colours that occur in the input.

    >>> downscale(np.zeros((2160, 3840, 3), np.uint8)).codes.shape
    (360, 640, 3)
    """
    img = np.asarray(codes)
    if img.ndim != 3 or img.shape[0] == 0 or img.shape[1] == 0:
        raise ValueError(f"image must be an H x W x C array with pixels, not shape {img.shape}")
    if not isinstance(max_width, (int, np.integer)) or max_width < 1:
        raise ValueError(f"max_width must be a positive integer, not {max_width!r}")
    h, w = int(img.shape[0]), int(img.shape[1])
    factor = max(1, -(-w // int(max_width)))
    small = img if factor == 1 else np.ascontiguousarray(img[::factor, ::factor])
    return DownscaledImage(small, factor, (h, w))
