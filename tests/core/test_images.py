"""Reading image files: every mode conversion, EXIF orientation, limits, broken files."""

import io

import numpy as np
import pytest
from PIL import Image

from fxnet_widgets.core import images
from fxnet_widgets.core.fileio import FileFormatError
from fxnet_widgets.core.images import image_to_png_bytes, read_image, save_png


def _file(im, fmt="PNG", **kw):
    buf = io.BytesIO()
    im.save(buf, fmt, **kw)
    buf.seek(0)
    return buf


def test_rgb_is_read_unchanged_without_a_note(tmp_path):
    a = np.random.default_rng(0).integers(0, 256, (5, 4, 3), dtype=np.uint8)
    save_png(tmp_path / "a.png", a)
    img = read_image(tmp_path / "a.png")
    assert img.note == ""
    assert img.shape == (5, 4)
    np.testing.assert_array_equal(img.codes, a)
    assert not img.codes.flags.writeable


def test_rgba_drops_alpha_without_compositing():
    a = np.array([[[10, 20, 30, 0], [40, 50, 60, 255]]], np.uint8)
    img = read_image(_file(Image.fromarray(a, "RGBA")))
    assert img.codes.tolist() == [[[10, 20, 30], [40, 50, 60]]]
    assert img.note == "mode RGBA converted to RGB (alpha dropped)"


def test_la_and_l_copy_grey_to_every_channel():
    la = read_image(_file(Image.fromarray(np.array([[[10, 0], [200, 255]]], np.uint8), "LA")))
    assert la.codes.tolist() == [[[10, 10, 10], [200, 200, 200]]]
    assert la.note == "mode LA converted to RGB (grey copied to R, G and B; alpha dropped)"
    grey = read_image(_file(Image.fromarray(np.array([[0, 77, 255]], np.uint8), "L")))
    assert grey.codes.tolist() == [[[0, 0, 0], [77, 77, 77], [255, 255, 255]]]
    assert grey.note == "mode L converted to RGB (grey copied to R, G and B)"


def test_palette_is_looked_up():
    p = Image.new("P", (2, 1))
    p.putpalette([0, 0, 0, 255, 0, 0, 0, 0, 255] + [0] * 759)
    p.putpixel((0, 0), 1)
    p.putpixel((1, 0), 2)
    img = read_image(_file(p))
    assert img.codes.tolist() == [[[255, 0, 0], [0, 0, 255]]]
    assert img.note == "mode P converted to RGB (palette looked up)"


def test_sixteen_bit_grey_keeps_the_high_byte():
    a = np.array([[0, 300, 65535, 32768, 255]], np.uint16)
    img = read_image(_file(Image.fromarray(a)))
    # code >> 8 is the documented rule (an 8-bit code is the top byte of a 16-bit one)
    assert img.codes[..., 0].tolist() == [[0, 1, 255, 128, 0]]
    assert (img.codes == img.codes[..., :1]).all()
    assert img.note == "mode I;16 converted to RGB (16-bit grey scaled to 8 bits: code >> 8)"


def test_cmyk_uses_the_naive_formula():
    cmyk = [(0, 0, 0, 0), (255, 0, 0, 0), (50, 100, 150, 100), (0, 0, 0, 255), (10, 20, 30, 40)]
    im = Image.frombytes("CMYK", (len(cmyk), 1), bytes(v for px in cmyk for v in px))
    img = read_image(_file(im, "TIFF"))
    # pillow's profile-less conversion R = (255 - C)(255 - K) / 255 rounded (pillow source,
    # libImaging/Convert.c cmyk2rgb, from memory); a*b/255 is never a tie for integers
    want = [[round((255 - px[j]) * (255 - px[3]) / 255) for j in range(3)] for px in cmyk]
    assert img.codes[0].tolist() == want
    assert img.note.startswith("mode CMYK converted to RGB (no colour profile")


def test_bilevel_is_black_and_white():
    im = Image.new("1", (2, 1), 0)
    im.putpixel((1, 0), 1)
    img = read_image(_file(im))
    assert img.codes.tolist() == [[[0, 0, 0], [255, 255, 255]]]
    assert img.note == "mode 1 converted to RGB (black 0, white 255)"


@pytest.mark.parametrize(
    ("orientation", "turn"),
    # EXIF 2.32 (CIPA DC-008) tag 0x0112: 3 = rotate 180, 6 = rotate 90 CW, 8 = rotate 90 CCW to view
    [(3, lambda a: np.rot90(a, 2)), (6, lambda a: np.rot90(a, -1)), (8, lambda a: np.rot90(a, 1))],
)
def test_exif_orientation_is_applied(orientation, turn):
    a = np.arange(2 * 3 * 3, dtype=np.uint8).reshape(2, 3, 3) * 10
    im = Image.fromarray(a)
    exif = im.getexif()
    exif[0x0112] = orientation
    img = read_image(_file(im, "PNG", exif=exif.tobytes()))
    np.testing.assert_array_equal(img.codes, turn(a))
    assert img.note == f"EXIF orientation {orientation} applied"


def test_pixel_limit_is_kept(monkeypatch):
    monkeypatch.setattr(images, "MAX_IMAGE_PIXELS", 10)
    buf = _file(Image.new("RGB", (4, 3)))
    buf.name = "big.png"
    with pytest.raises(FileFormatError, match=r"^big\.png: image is 4x3 = 12 pixels, more than the limit of 10$"):
        read_image(buf)


def test_broken_and_missing_files(tmp_path):
    noise = np.random.default_rng(2).integers(0, 256, (64, 64, 3), dtype=np.uint8)
    good = image_to_png_bytes(noise)
    (tmp_path / "cut.png").write_bytes(good[: len(good) * 4 // 5])
    with pytest.raises(FileFormatError, match=r"^.*cut\.png: broken or truncated image \(.+\)$"):
        read_image(tmp_path / "cut.png")
    (tmp_path / "text.png").write_text("not an image")
    with pytest.raises(FileFormatError, match=r"^.*text\.png: not an image file pillow can read$"):
        read_image(tmp_path / "text.png")
    with pytest.raises(FileFormatError, match=r"^.*nope\.png: no such file$"):
        read_image(tmp_path / "nope.png")
    with pytest.raises(FileFormatError, match=r"^.*: is a directory, not a file$"):
        read_image(tmp_path)


def test_png_bytes_round_trip_and_type_check():
    a = np.random.default_rng(1).integers(0, 256, (3, 5, 3), dtype=np.uint8)
    np.testing.assert_array_equal(read_image(io.BytesIO(image_to_png_bytes(a))).codes, a)
    with pytest.raises(TypeError, match=r"^image must be uint8, not float64$"):
        image_to_png_bytes(a.astype(np.float64))
