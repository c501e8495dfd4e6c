"""Image and ``.npy`` input files fuzzed by the thousand.

Images go through ``read_image`` (random bytes behind real magic numbers,
valid small images truncated or with flipped bytes, headers declaring absurd
sizes); ``.npy`` files through the command line's ``load_input`` (every dtype,
every rank, out-of-range values, corrupted headers). A case passes when it gives
the right codes or a one-line ``TypeError``/``ValueError``/``FileFormatError``
that starts with the file's name.
"""

from __future__ import annotations

import io
import re
import struct
import time
import zlib
from pathlib import Path

import numpy as np
import pytest
from _hardening_support import check_message, count, examples, scratch_dir
from hypothesis import given, note, settings
from hypothesis import strategies as st
from PIL import Image

import fxnet_widgets as fw
from fxnet_widgets.cli._common import load_input
from fxnet_widgets.core.fileio import FileFormatError, load_npy
from fxnet_widgets.core.images import MAX_IMAGE_PIXELS, read_image

pytestmark = pytest.mark.filterwarnings("ignore::UserWarning:PIL.*")  # pillow notes on damaged files
WORK = scratch_dir("fxnet-fuzz-inputs-")
NET = fw.Network.from_layers([([[1.0, -1.0, 0.5]], [0.0], "sigmoid")])

# magic numbers of the formats pillow reads (each format's specification: PNG ISO/IEC 15948 5.2,
# JPEG ITU T.81 B.1.1.2 SOI, GIF89a, BMP "BM", TIFF 6.0 section 2, RIFF/WEBP, netpbm P6)
MAGICS = [b"", b"\x89PNG\r\n\x1a\n", b"\xff\xd8\xff", b"GIF89a", b"BM", b"II*\x00", b"MM\x00*",
          b"RIFF\x00\x00\x00\x00WEBP", b"P6\n"]  # fmt: skip


def write(name: str, data: bytes) -> Path:
    path = WORK / name
    path.write_bytes(data)
    return path


def check_image(result: fw.RGBImage, width: int | None = None, height: int | None = None) -> None:
    codes = result.codes
    assert codes.dtype == np.uint8 and codes.ndim == 3 and codes.shape[2] == 3
    assert codes.shape[0] >= 1 and codes.shape[1] >= 1
    assert "\n" not in result.note
    if width is not None:
        assert codes.shape[:2] in ((height, width), (width, height))  # EXIF may turn it


@settings(max_examples=examples(1000))
@given(st.sampled_from(MAGICS), st.binary(max_size=600))
def test_random_bytes_behind_a_magic_number(magic, body):
    count("image files: random bytes")
    path = write("random.img", magic + body)
    try:
        img = read_image(path)
    except Exception as exc:  # noqa: BLE001 - the checks decide
        check_message(exc, f"{path}: ")
        assert isinstance(exc, FileFormatError)
        return
    check_image(img)


FORMATS = {  # format: modes it can hold, lossless?
    "PNG": (("RGB", "RGBA", "L", "LA", "P", "1", "I;16"), True),
    "JPEG": (("RGB", "L", "CMYK"), False),
    "BMP": (("RGB", "L", "P", "1"), True),
    "GIF": (("P", "L"), True),
    "TIFF": (("RGB", "RGBA", "L", "1", "CMYK"), True),
    "WEBP": (("RGB", "RGBA"), False),
    "PPM": (("RGB", "L"), True),
}


@st.composite
def damaged_image(draw: st.DrawFn) -> tuple[bytes, bytes, str, str, int, int, np.ndarray]:
    fmt = draw(st.sampled_from(sorted(FORMATS)))
    mode = draw(st.sampled_from(FORMATS[fmt][0]))
    w, h = draw(st.integers(1, 12)), draw(st.integers(1, 12))
    seed = draw(st.integers(0, 2**32 - 1))
    rgb = np.random.default_rng(seed).integers(0, 256, (h, w, 3), dtype=np.uint8)
    im = Image.fromarray(rgb).convert(mode) if mode != "I;16" else Image.fromarray(rgb[..., 0].astype(np.uint16) * 257)
    buf = io.BytesIO()
    im.save(buf, format=fmt)
    good = buf.getvalue()
    cut = draw(st.integers(0, len(good)))
    data = bytearray(good[:cut])
    flips = draw(st.lists(st.tuples(st.integers(0, max(len(data) - 1, 0)), st.integers(1, 255)), max_size=3))
    for pos, x in flips if data else ():
        data[pos] ^= x
    return good, bytes(data), fmt, mode, w, h, rgb


@settings(max_examples=examples(1000))
@given(damaged_image())
def test_truncated_and_flipped_images(case):
    count("image files: truncated or damaged")
    good, data, fmt, mode, w, h, rgb = case
    path = write(f"damaged.{fmt.lower()}", data)
    try:
        img = read_image(path)
    except Exception as exc:  # noqa: BLE001
        check_message(exc, f"{path}: ")
        assert isinstance(exc, FileFormatError)
        return
    # a damaged file that still decodes may change its size (a GIF frame offset past the logical
    # screen grows pillow's canvas): only an untouched file must keep its declared size
    check_image(img, w, h) if data == good else check_image(img)
    if data == good and FORMATS[fmt][1] and mode == "RGB":
        # an untouched lossless RGB file gives back exactly its pixels
        assert np.array_equal(img.codes, rgb)


def png_chunk(kind: bytes, data: bytes) -> bytes:
    # PNG chunk layout: length, type, data, CRC-32 of type + data (ISO/IEC 15948, 5.3)
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def png_claiming(width: int, height: int) -> bytes:
    ihdr = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)  # 8-bit truecolour (ISO/IEC 15948, 11.2.2)
    return b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr) + png_chunk(b"IDAT", zlib.compress(b"\0" * 64)) + png_chunk(
        b"IEND", b""
    )


def bmp_claiming(width: int, height: int) -> bytes:
    # BITMAPFILEHEADER + BITMAPINFOHEADER, 24 bits per pixel (Microsoft BMP file format documentation)
    info = struct.pack("<IiiHHIIiiII", 40, width, height, 1, 24, 0, 0, 2835, 2835, 0, 0)
    return b"BM" + struct.pack("<IHHI", 14 + 40 + 16, 0, 0, 54) + info + b"\0" * 16


def gif_claiming(width: int, height: int) -> bytes:
    # GIF89a logical screen descriptor, then one image descriptor of the same size (GIF89a spec, sections 18, 20)
    head = b"GIF89a" + struct.pack("<HHBBB", width, height, 0x80, 0, 0) + b"\0\0\0\xff\xff\xff"
    desc = b"," + struct.pack("<HHHHB", 0, 0, width, height, 0)
    return head + desc + b"\x02\x02\x44\x01\x00;"


@pytest.mark.parametrize("make", [png_claiming, bmp_claiming, gif_claiming])
@pytest.mark.parametrize("size", [(100_000, 100_000), (65_535, 65_535), (1, 2**31 - 1)])
def test_absurd_declared_sizes_are_refused_at_once(make, size):
    w, h = size
    if make is gif_claiming:
        w, h = min(w, 65_535), min(h, 65_535)  # GIF sizes are 16-bit
    path = write(f"absurd-{make.__name__}.img", make(w, h))
    start = time.perf_counter()
    with pytest.raises(FileFormatError) as info:
        read_image(path)
    elapsed = time.perf_counter() - start
    msg = check_message(info.value, f"{path}: ")
    if w * h > MAX_IMAGE_PIXELS:
        assert "too large" in msg or "more than the limit" in msg, msg
    # a hang guard, not a benchmark: the header alone must be enough to refuse it
    assert elapsed < 5.0


# -- .npy files ------------------------------------------------------------------------
DTYPES = ["bool", "int8", "int16", "int32", "int64", "uint8", "uint16", "uint32", "uint64", "float16", "float32",
          "float64", "longdouble", "complex64", "complex128", "U3", "S3", "V2", "datetime64[s]", "timedelta64[ms]",
          "u1,u1,u1", ">u2", ">i8", "object"]  # fmt: skip


@st.composite
def npy_case(draw: st.DrawFn) -> tuple[np.ndarray, bool]:
    dtype = np.dtype(draw(st.sampled_from(DTYPES)))
    ndim = draw(st.integers(0, 4))
    shape = tuple(draw(st.lists(st.sampled_from([0, 1, 2, 3, 4, 5]), min_size=ndim, max_size=ndim)))
    if ndim == 2 and draw(st.booleans()):
        shape = (shape[0], 3)
    n = int(np.prod(shape))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    top = draw(st.sampled_from([2, 256, 257, 2**16, 2**40]))
    raw = rng.integers(0, top, n, dtype=np.int64) - (draw(st.integers(0, 1)) * rng.integers(0, 2, n))
    if dtype.kind == "O":
        arr = np.array(raw.tolist() + [None], dtype=object)[:n].reshape(shape)
    elif dtype.names:
        arr = np.zeros(shape, dtype=dtype)
    elif dtype.kind in "USV":
        arr = np.zeros(shape, dtype=dtype)
    elif dtype.kind in "mM":
        arr = raw.astype(dtype).reshape(shape)
    else:
        with np.errstate(all="ignore"):
            arr = raw.astype(dtype).reshape(shape)
    fortran = draw(st.booleans()) and ndim >= 2
    return (np.asfortranarray(arr) if fortran else arr), dtype.kind == "O"


@settings(max_examples=examples(1500))
@given(npy_case())
def test_npy_inputs_of_every_dtype_and_shape(case):
    count("npy files: every dtype and shape")
    arr, is_object = case
    note(f"{arr.dtype} {arr.shape}")
    path = WORK / "codes.npy"
    np.save(path, arr, allow_pickle=is_object)  # the test writes a pickled file on purpose; the product must refuse it
    # what the contract accepts: N x 3 unsigned codes of 8 bits (semantics.md, "Command line")
    ok = (
        arr.dtype.kind in "iu" and arr.dtype.names is None and arr.ndim == 2 and arr.shape[1] == 3
        and (arr.size == 0 or (int(arr.min()) >= 0 and int(arr.max()) <= 255))
    )  # fmt: skip
    try:
        codes, note_ = load_input(str(path), NET)
    except Exception as exc:  # noqa: BLE001
        check_message(exc, f"{path}: ")
        assert not ok, f"valid codes refused: {exc}"
        return
    assert ok, f"{arr.dtype} {arr.shape} accepted"
    assert np.array_equal(codes, arr) and note_ == ""
    result = fw.emulate(NET, PLAN, codes)
    assert result.out_codes.shape == (arr.shape[0], 1)


PLAN = fw.Plan.uniform(NET, weight_bits=8, weight_frac=5, acc_bits=18, out_bits=8, table_bits=10, table_frac=6)


@settings(max_examples=examples(1000))
@given(st.integers(0, 2**32 - 1), st.integers(0, 200), st.lists(st.tuples(st.integers(0, 199), st.integers(1, 255)),
                                                                 max_size=4))  # fmt: skip
def test_corrupted_npy_files(seed, cut, flips):
    count("npy files: corrupted")
    arr = np.random.default_rng(seed).integers(0, 256, (int(seed % 7), 3)).astype(np.uint8)
    buf = io.BytesIO()
    np.save(buf, arr)
    data = bytearray(buf.getvalue()[: len(buf.getvalue()) - cut if cut < len(buf.getvalue()) else 0])
    for pos, x in flips:
        if pos < len(data):
            data[pos] ^= x
    path = write("corrupt.npy", bytes(data))
    try:
        got = load_npy(path)
    except Exception as exc:  # noqa: BLE001
        check_message(exc, f"{path}: ")
        assert isinstance(exc, FileFormatError)
        return
    if bytes(data) == buf.getvalue():
        assert np.array_equal(got, arr)
    assert isinstance(got, np.ndarray)


@pytest.mark.parametrize("shape", [(10**12,), (10**6, 10**6), (2**40, 3)])
def test_npy_header_declaring_terabytes_is_refused_without_allocating(shape):
    # .npy version 1.0 header: magic, version, little-endian header length, dict literal padded to 64 bytes
    # (numpy.lib.format documentation, "Format Version 1.0")
    header = f"{{'descr': '<u1', 'fortran_order': False, 'shape': {shape!r}, }}"
    header += " " * ((64 - (10 + len(header) + 1) % 64) % 64) + "\n"
    path = write("huge.npy", b"\x93NUMPY\x01\x00" + struct.pack("<H", len(header)) + header.encode() + b"\0" * 64)
    n = int(np.prod(shape))
    want = (
        f"{path}: not a readable .npy array (the header declares shape {shape!r} of uint8 ({n} bytes), "
        "but the file holds 64)"
    )
    with pytest.raises(FileFormatError, match=f"^{re.escape(want)}$"):
        load_npy(path)
