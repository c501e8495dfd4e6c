"""Footage in: video files through PyAV, image folders and glob patterns through pillow.

Every frame comes out as H x W x 3 uint8 RGB codes with its index (counted in
decoding order from 0, before the range and stride are applied) and its time in
seconds. Video frames that are not RGB already are converted from Y'CbCr with a
stated matrix and range, never a guessed one left unsaid:

* matrix: the stream's tag (ITU-R BT.709 or ITU-R BT.601); an untagged stream is
  read as ITU-R BT.601, FFmpeg's own default for untagged Y'CbCr;
* range: the stream's tag; an untagged stream is read as limited ("MPEG", Y' 16..235,
  Cb/Cr 16..240, ITU-R BT.601 / BT.709 quantisation), except the full-range ``yuvj``
  formats;
* output: full-range 8-bit R'G'B' (0..255), converted by FFmpeg's swscale with
  ``ACCURATE_RND | BITEXACT`` (reproducible on every machine); chroma is upsampled
  bilinearly.

:attr:`FootageInfo.colour` says which was used. RGB codecs (FFV1 ``bgr0``/``gbrp``,
H.264 RGB, PNG in a container, animated GIF) are read without conversion.

Why PyAV: its wheels ship their own FFmpeg libraries (no system FFmpeg needed), it
reads every container and codec FFmpeg reads (MP4/H.264, Matroska, AVI, GIF...),
and it exposes the frame's colour tags and swscale's colourspace/range arguments,
so the conversion can be stated and pinned. ``av`` is imported on first use only
(the ``footage`` extra), so the rest of the core does not need it.

Examples
--------
>>> import tempfile, os, numpy as np
>>> from PIL import Image
>>> d = tempfile.mkdtemp()
>>> for i in (10, 2, 1):
...     Image.fromarray(np.full((4, 6, 3), i, np.uint8)).save(os.path.join(d, f"f{i}.png"))
>>> clip = open_footage(d)
>>> [(f.index, int(f.rgb[0, 0, 0])) for f in clip]   # natural order: f1, f2, f10
[(0, 1), (1, 2), (2, 10)]
"""

from __future__ import annotations

import glob
import os
import re
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..fileio import FileFormatError, first_line
from ..images import read_image

__all__ = [
    "Frame",
    "FootageInfo",
    "Footage",
    "open_footage",
    "parse_frames",
    "natural_key",
    "IMAGE_SUFFIXES",
    "MAX_FRAME_PIXELS",
]

#: image files an image folder may hold (pillow reads them)
IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".tif", ".tiff", ".bmp", ".ppm", ".webp")
#: largest frame accepted: 7680 x 4320 (8K UHD, ITU-R BT.2020 image format)
MAX_FRAME_PIXELS = 7680 * 4320
#: a video giving more broken frames than this in a row is refused as broken
MAX_BROKEN_IN_A_ROW = 8

_RGB_FORMATS = {"rgb24", "bgr24", "rgba", "bgra", "argb", "abgr", "rgb0", "bgr0", "0rgb", "0bgr", "gbrp", "pal8"}


@dataclass(frozen=True)
class Frame:
    """One decoded frame: ``index`` in the source, ``time_s`` in seconds, ``rgb`` H x W x 3 uint8."""

    index: int
    time_s: float
    rgb: np.ndarray


@dataclass
class FootageInfo:
    """What a source holds and how it is decoded (``frames`` and ``rate`` may be unknown: None)."""

    source: str
    kind: str  # "video" or "images"
    width: int
    height: int
    frames: int | None
    rate: float | None
    codec: str
    colour: str
    broken: list[str] = field(default_factory=list)  # one line per broken frame that was skipped

    def to_dict(self) -> dict[str, Any]:
        return {
            "source": self.source, "kind": self.kind, "width": self.width, "height": self.height,
            "frames": self.frames, "rate": self.rate, "codec": self.codec, "colour": self.colour,
            "broken": list(self.broken),
        }  # fmt: skip


def natural_key(name: str) -> list[Any]:
    """Sort key putting ``f2`` before ``f10`` (digit runs compared as numbers)."""
    return [(0, int(t), t) if t.isdigit() else (1, 0, t.lower()) for t in re.split(r"(\d+)", name) if t]


def parse_frames(text: str | slice | None) -> slice:
    """``"A:B:S"`` (any part may be left out) as a slice of frame indices; ``None`` is every frame."""
    if text is None:
        return slice(0, None, 1)
    if isinstance(text, slice):
        parts: list[Any] = [text.start, text.stop, text.step]
    else:
        bits = str(text).split(":")
        if len(bits) > 3 or not all(re.fullmatch(r"\s*\d*\s*", b) for b in bits):
            raise ValueError(f"frames must be A:B:S with non-negative integers (any part may be empty), not {text!r}")
        parts = [int(b) if b.strip() else None for b in bits] + [None] * (3 - len(bits))
    start, stop, step = parts
    start = 0 if start is None else start
    step = 1 if step is None else step
    for name, v in (("start", start), ("stop", stop), ("step", step)):
        if v is not None and (not isinstance(v, int) or isinstance(v, bool) or v < 0):
            raise ValueError(f"frames {name} must be a non-negative integer, not {v!r}")
    if step < 1:
        raise ValueError(f"frames step must be at least 1, not {step!r}")
    if stop is not None and stop < start:
        raise ValueError(f"frames stop must be at least the start {start}, not {stop!r}")
    return slice(start, stop, step)


def _wanted(i: int, sl: slice) -> bool:
    return i >= sl.start and (sl.stop is None or i < sl.stop) and (i - sl.start) % sl.step == 0


def _range_text(sl: slice) -> str:
    return f"{sl.start}:{'' if sl.stop is None else sl.stop}:{sl.step}"


class Footage:
    """An opened source: iterate it for :class:`Frame` objects (it can be iterated again).

    Use :func:`open_footage` to make one.
    """

    def __init__(self, info: FootageInfo, frames: slice, files: list[str] | None, max_pixels: int) -> None:
        self.info = info
        self.frames = frames
        self._files = files
        self._max_pixels = max_pixels

    def __repr__(self) -> str:
        i = self.info
        return f"<Footage {i.kind} {i.source!r} {i.width}x{i.height}, frames {_range_text(self.frames)}>"

    def __iter__(self) -> Iterator[Frame]:
        self.info.broken.clear()
        n = 0
        it = self._images() if self._files is not None else self._video()
        for frame in it:
            n += 1
            yield frame
        if n == 0:
            raise FileFormatError(
                f"{self.info.source}: frames {_range_text(self.frames)} must hold at least one decodable frame, not 0"
            )

    def read(self) -> list[Frame]:
        """Every frame of the range (in memory: for short clips)."""
        return list(self)

    # -- image folders --------------------------------------------------------------
    def _images(self) -> Iterator[Frame]:
        assert self._files is not None
        rate = self.info.rate
        for i, path in enumerate(self._files):
            if self.frames.stop is not None and i >= self.frames.stop:
                return
            if not _wanted(i, self.frames):
                continue
            try:
                rgb = read_image(path).codes
            except (FileFormatError, OSError) as exc:
                self.info.broken.append(f"frame {i}: {first_line(exc)}")
                continue
            if rgb.shape[:2] != (self.info.height, self.info.width):
                h, w = rgb.shape[:2]
                self.info.broken.append(
                    f"frame {i}: {path}: size must be {self.info.width}x{self.info.height} "
                    f"(the first frame's), not {w}x{h}"
                )
                continue
            yield Frame(i, i / rate if rate else float(i), rgb)

    # -- video --------------------------------------------------------------------
    def _video(self) -> Iterator[Frame]:
        av = _import_av()
        src = self.info.source
        with _open_container(av, src) as container:
            stream = container.streams.video[0]
            i = -1
            in_a_row = 0
            packets = container.demux(stream)
            while True:
                try:
                    packet = next(packets)
                except StopIteration:
                    break
                except av.error.FFmpegError as exc:  # a broken container after some frames
                    self.info.broken.append(f"after frame {i}: demuxing stopped ({first_line(exc)})")
                    break
                try:
                    decoded = packet.decode()
                except av.error.FFmpegError as exc:
                    in_a_row += 1
                    self.info.broken.append(f"frame {i + 1}: {first_line(exc)} (skipped)")
                    if in_a_row > MAX_BROKEN_IN_A_ROW:
                        raise FileFormatError(
                            f"{src}: must be a decodable video, not {in_a_row} broken frames in a row"
                        ) from None
                    i += 1  # a packet that does not decode is one lost frame
                    continue
                in_a_row = 0
                for vf in decoded:
                    i += 1
                    if self.frames.stop is not None and i >= self.frames.stop:
                        return
                    if not _wanted(i, self.frames):
                        continue
                    if vf.width * vf.height > self._max_pixels:
                        raise FileFormatError(
                            f"{src}: frame size must be at most {self._max_pixels} pixels, "
                            f"not {vf.width}x{vf.height}"
                        )
                    t = float(vf.time) if vf.time is not None else (i / self.info.rate if self.info.rate else i)
                    yield Frame(i, t, _to_rgb(av, vf))
            expected = self.info.frames
            if expected is not None and i + 1 < expected - 1 and (self.frames.stop is None or self.frames.stop > i + 1):
                self.info.broken.append(
                    f"after frame {i}: the file ends, but its header announces {expected} frames (truncated?)"
                )


def _import_av() -> Any:
    try:
        import av
    except ImportError:  # pragma: no cover - the footage extra
        raise ImportError("reading video needs PyAV: pip install 'fxnet-widgets[footage]' (or av)") from None
    return av


def _open_container(av: Any, src: str) -> Any:
    try:
        return av.open(src, mode="r")
    except FileNotFoundError:
        raise FileFormatError(f"{src}: no such file") from None
    except av.error.FFmpegError as exc:
        raise FileFormatError(
            f"{src}: must be a video container FFmpeg can read, not this file ({first_line(exc)})"
        ) from None


def colour_conversion(av: Any, vf: Any) -> tuple[str, Any, Any]:
    """``(description, colorspace, range)`` used to turn the frame ``vf`` into RGB."""
    from av.video.reformatter import ColorRange, Colorspace

    fmt = vf.format.name
    if fmt in _RGB_FORMATS:
        return f"{fmt}: R'G'B' as stored (no conversion)", None, None
    if fmt.startswith(("gray", "ya")):
        return f"{fmt}: grey copied to R, G and B", None, None
    cs = int(vf.colorspace or 2)
    if cs == int(Colorspace.ITU709):
        matrix, space = "ITU-R BT.709 matrix", Colorspace.ITU709
    elif cs in (5, 6):  # BT.470BG, SMPTE 170M: the BT.601 matrix
        matrix, space = "ITU-R BT.601 matrix", Colorspace.ITU601
    else:
        tag = "untagged" if cs == 2 else f"tag {cs} not BT.601/BT.709"
        matrix, space = f"ITU-R BT.601 matrix ({tag}: FFmpeg's default)", Colorspace.ITU601
    full = int(vf.color_range or 0) == int(ColorRange.JPEG) or fmt.startswith("yuvj")
    rng = "full range (0..255)" if full else "limited range (Y' 16..235, Cb/Cr 16..240)"
    return f"{fmt}: {matrix}, {rng} -> full-range R'G'B'", space, ColorRange.JPEG if full else ColorRange.MPEG


def _to_rgb(av: Any, vf: Any) -> np.ndarray:
    from av.video.reformatter import ColorRange, Interpolation

    _, space, rng = colour_conversion(av, vf)
    flags = Interpolation.BILINEAR | Interpolation.ACCURATE_RND | Interpolation.BITEXACT
    if space is None:
        out = vf.to_ndarray(format="rgb24", interpolation=flags)
    else:
        out = vf.to_ndarray(format="rgb24", src_colorspace=space, dst_colorspace=space, interpolation=flags,
                            src_color_range=rng, dst_color_range=ColorRange.JPEG)  # fmt: skip
    return np.ascontiguousarray(out, dtype=np.uint8)


def _image_files(source: str) -> list[str] | None:
    if os.path.isdir(source):
        names = [os.path.join(source, n) for n in os.listdir(source) if n.lower().endswith(IMAGE_SUFFIXES)]
        if not names:
            raise FileFormatError(f"{source}: folder must hold image files ({', '.join(IMAGE_SUFFIXES)}), not none")
    elif glob.has_magic(source):
        names = [n for n in glob.glob(source) if os.path.isfile(n)]
        if not names:
            raise FileFormatError(f"{source}: pattern must match at least one file, not none")
    elif source.lower().endswith(IMAGE_SUFFIXES):
        names = [source]
    else:
        return None
    return sorted(names, key=lambda n: natural_key(os.path.basename(n)))


def open_footage(
    source: str | os.PathLike[str],
    frames: str | slice | None = None,
    *,
    rate: float | None = None,
    max_pixels: int = MAX_FRAME_PIXELS,
) -> Footage:
    """Open a video file, an image folder, a glob pattern or one image as footage.

    Parameters
    ----------
    source
        A video file (anything FFmpeg reads: MP4/H.264, Matroska, AVI, animated GIF...),
        a folder of images, or a glob pattern (``"shots/*.png"``); images are ordered
        by natural sort of their file names (``f2`` before ``f10``).
    frames
        ``"A:B:S"`` or a slice: frames A (included) to B (excluded), every S-th.
    rate
        Frame rate of an image sequence (frames per second) for ``time_s``; default: none
        (``time_s`` is then the frame index).
    max_pixels
        Largest frame accepted (default :data:`MAX_FRAME_PIXELS`).

    Raises
    ------
    FileFormatError
        One line naming the file: missing, not a video, no video stream, frames too large.
    """
    src = os.fspath(source)
    sl = parse_frames(frames)
    if rate is not None and not (isinstance(rate, (int, float)) and rate > 0 and np.isfinite(rate)):
        raise ValueError(f"rate must be a positive number of frames per second, not {rate!r}")
    files = _image_files(src)
    if files is not None:
        first = None
        for path in files:  # the first readable image sets the size
            try:
                first = read_image(path).codes
                break
            except (FileFormatError, OSError):
                continue
        if first is None:
            raise FileFormatError(f"{src}: must hold at least one readable image, not none of {len(files)} files")
        h, w = first.shape[:2]
        if w * h > max_pixels:
            raise FileFormatError(f"{src}: frame size must be at most {max_pixels} pixels, not {w}x{h}")
        info = FootageInfo(src, "images", w, h, len(files), None if rate is None else float(rate), "pillow",
                           "R'G'B' as stored in the image files (pillow; other modes converted)")  # fmt: skip
        return Footage(info, sl, files, max_pixels)
    if not os.path.exists(src):
        raise FileFormatError(f"{src}: no such file")
    if os.path.isfile(src) and os.path.getsize(src) == 0:
        raise FileFormatError(f"{src}: must be a video file, not an empty file")
    av = _import_av()
    with _open_container(av, src) as container:
        if not container.streams.video:
            raise FileFormatError(f"{src}: must hold a video stream, not {len(container.streams)} other streams")
        stream = container.streams.video[0]
        w, h = int(stream.codec_context.width), int(stream.codec_context.height)
        if w <= 0 or h <= 0:
            raise FileFormatError(f"{src}: frame size must be known and positive, not {w}x{h}")
        if w * h > max_pixels:
            raise FileFormatError(f"{src}: frame size must be at most {max_pixels} pixels, not {w}x{h}")
        r = stream.average_rate or stream.guessed_rate
        fps = float(r) if r else (None if rate is None else float(rate))
        n = int(stream.frames) or None
        if n is None and fps and container.duration:  # Matroska: the duration, not a count
            n = int(round(container.duration / 1e6 * fps))
        colour = "decided per frame from its tags"
        try:  # the first frame's tags state the conversion
            for vf in container.decode(stream):
                colour = colour_conversion(av, vf)[0]
                break
        except av.error.FFmpegError as exc:
            raise FileFormatError(f"{src}: must start with a decodable frame, not ({first_line(exc)})") from None
        info = FootageInfo(src, "video", w, h, n, fps, stream.codec_context.name, colour)
    return Footage(info, sl, None, max_pixels)
