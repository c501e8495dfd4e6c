"""Image files in and out (pillow): RGB codes with a note of every conversion.

>>> import io
>>> from PIL import Image
>>> buf = io.BytesIO(); Image.new("L", (2, 1), 200).save(buf, "PNG"); _ = buf.seek(0)
>>> img = read_image(buf)
>>> img.codes.tolist(), img.note
([[[200, 200, 200], [200, 200, 200]]], 'mode L converted to RGB (grey copied to R, G and B)')
"""

from __future__ import annotations

import io
import os
import struct
import warnings
from dataclasses import dataclass
from typing import IO, Any

import numpy as np
from PIL import Image, ImageOps, UnidentifiedImageError

from .fileio import FileFormatError, atomic_write_bytes, first_line

__all__ = ["RGBImage", "read_image", "image_to_png_bytes", "save_png", "MAX_IMAGE_PIXELS"]

#: pillow's decompression-bomb limit is kept (pillow's default, about 89 Mpixel)
MAX_IMAGE_PIXELS = Image.MAX_IMAGE_PIXELS or 89_478_485

_CONVERSIONS = {
    "RGBA": "mode RGBA converted to RGB (alpha dropped)",
    "LA": "mode LA converted to RGB (grey copied to R, G and B; alpha dropped)",
    "L": "mode L converted to RGB (grey copied to R, G and B)",
    "1": "mode 1 converted to RGB (black 0, white 255)",
    "P": "mode P converted to RGB (palette looked up)",
    "PA": "mode PA converted to RGB (palette looked up; alpha dropped)",
    "CMYK": (
        "mode CMYK converted to RGB (no colour profile: "
        "R = (255 - C) * (255 - K) / 255 rounded, G and B alike)"
    ),
    "YCbCr": "mode YCbCr converted to RGB",
    "I;16": "mode I;16 converted to RGB (16-bit grey scaled to 8 bits: code >> 8)",
    "I;16B": "mode I;16B converted to RGB (16-bit grey scaled to 8 bits: code >> 8)",
    "I;16L": "mode I;16L converted to RGB (16-bit grey scaled to 8 bits: code >> 8)",
    "I": "mode I converted to RGB (32-bit grey clipped to 0..65535, then code >> 8)",
    "F": "mode F converted to RGB (float grey clipped to 0..255 and rounded)",
}


@dataclass(frozen=True)
class RGBImage:
    """An image as H x W x 3 uint8 codes, with what was done to get there."""

    codes: np.ndarray
    note: str  # empty when the file was already 8-bit RGB and upright
    name: str = ""

    @property
    def shape(self) -> tuple[int, int]:
        return int(self.codes.shape[0]), int(self.codes.shape[1])


def _to_rgb(im: Image.Image) -> tuple[np.ndarray, str]:
    mode = im.mode
    if mode == "RGB":
        return np.asarray(im, dtype=np.uint8).copy(), ""
    if mode in ("I;16", "I;16B", "I;16L", "I"):
        a = np.asarray(im).astype(np.int64)
        grey = (np.clip(a, 0, 65535) >> 8).astype(np.uint8)
        return np.repeat(grey[..., None], 3, axis=2), _CONVERSIONS[mode]
    if mode == "F":
        a = np.asarray(im, dtype=np.float64)
        grey = np.clip(np.rint(np.nan_to_num(a)), 0, 255).astype(np.uint8)
        return np.repeat(grey[..., None], 3, axis=2), _CONVERSIONS[mode]
    note = _CONVERSIONS.get(mode, f"mode {mode} converted to RGB")
    return np.asarray(im.convert("RGB"), dtype=np.uint8).copy(), note


def read_image(source: str | os.PathLike[str] | IO[bytes]) -> RGBImage:
    """Read an image file as 8-bit RGB codes.

    EXIF orientation is applied; modes other than RGB are converted and the
    returned ``note`` says how; pillow's decompression-bomb limit is kept.

    Raises
    ------
    FileFormatError
        ``"<file>: <problem>"`` for a missing, unreadable, truncated or oversized image.
    """
    name = (
        os.fspath(source)
        if isinstance(source, (str, os.PathLike))
        else getattr(source, "name", "<image>")
    )
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            with Image.open(source) as im:
                w, h = im.size
                if w * h > MAX_IMAGE_PIXELS:
                    raise FileFormatError(
                        f"{name}: image is {w}x{h} = {w * h} pixels, "
                        f"more than the limit of {MAX_IMAGE_PIXELS}"
                    )
                im.load()
                notes = []
                orient = im.getexif().get(0x0112, 1) if hasattr(im, "getexif") else 1
                if orient not in (1, None):
                    im2 = ImageOps.exif_transpose(im)
                    notes.append(f"EXIF orientation {orient} applied")
                else:
                    im2 = im
                codes, note = _to_rgb(im2)
                if note:
                    notes.insert(0, note)
    except FileFormatError:
        raise
    except FileNotFoundError:
        raise FileFormatError(f"{name}: no such file") from None
    except IsADirectoryError:
        raise FileFormatError(f"{name}: is a directory, not a file") from None
    except (Image.DecompressionBombError, Image.DecompressionBombWarning) as exc:
        raise FileFormatError(f"{name}: image too large ({exc})") from None
    except UnidentifiedImageError:
        raise FileFormatError(f"{name}: not an image file pillow can read") from None
    except (OSError, ValueError, SyntaxError, EOFError, struct.error) as exc:
        raise FileFormatError(f"{name}: broken or truncated image ({first_line(exc)})") from None
    if codes.ndim != 3 or codes.shape[2] != 3 or codes.shape[0] == 0 or codes.shape[1] == 0:
        raise FileFormatError(f"{name}: image has no pixels")
    codes.setflags(write=False)
    return RGBImage(codes, "; ".join(notes), str(name))


def image_to_png_bytes(codes: Any) -> bytes:
    """PNG bytes of an H x W x 3 (or H x W) uint8 array."""
    arr = np.asarray(codes)
    if arr.dtype != np.uint8:
        raise TypeError(f"image must be uint8, not {arr.dtype}")
    buf = io.BytesIO()
    Image.fromarray(arr).save(buf, format="PNG", optimize=False, compress_level=6)
    return buf.getvalue()


def save_png(path: str | os.PathLike[str], codes: Any) -> None:
    """Write an image as PNG atomically (temporary file, then rename)."""
    atomic_write_bytes(path, image_to_png_bytes(codes))
