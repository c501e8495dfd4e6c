"""Labels from masks, class maps and CSV files; sampling with balance and a validation split."""

import numpy as np
import pytest

from fxnet_widgets.core.fileio import FileFormatError
from fxnet_widgets.core.images import save_png
from fxnet_widgets.core.labels import (
    ClassTable,
    LabelledPixels,
    labels_from_class_map,
    labels_from_csv,
    labels_from_mask,
    load_class_table,
    load_labels,
    sample_pixels,
)

IMG = np.array([[[200, 10, 10], [10, 200, 10], [10, 10, 200]], [[90, 90, 90], [250, 5, 5], [0, 0, 0]]], np.uint8)


def test_mask_labels_every_pixel(tmp_path):
    mask = np.array([[255, 0, 0], [0, 255, 0]], np.uint8)
    save_png(tmp_path / "img.png", IMG)
    save_png(tmp_path / "mask.png", mask)
    px = load_labels(tmp_path / "img.png", tmp_path / "mask.png", classes=("other", "ripe"))
    assert px.classes == ("other", "ripe")
    assert px.labels.tolist() == [1, 0, 0, 0, 1, 0]
    np.testing.assert_array_equal(px.codes, IMG.reshape(-1, 3))
    assert px.counts() == {"other": 4, "ripe": 2}


def test_mask_of_the_wrong_size_is_an_error(tmp_path):
    save_png(tmp_path / "img.png", IMG)
    save_png(tmp_path / "mask.png", np.zeros((3, 3), np.uint8))
    with pytest.raises(
        ValueError, match=r"^.*mask\.png: mask must be the size of the image .*img\.png \(3x2\), not 3x3$"
    ):
        labels_from_mask(tmp_path / "img.png", tmp_path / "mask.png")


def test_grey_mask_pixels_are_an_error():
    mask = np.array([[255, 0, 0], [0, 128, 0]], np.uint8)
    with pytest.raises(
        ValueError,
        match=r"^mask: mask pixels must be black \(0\) or white \(255\), not \(128, 128, 128\) at x=1, y=1 "
        r"\(save masks as PNG\)$",
    ):
        labels_from_mask(IMG, mask)


TABLE = ClassTable(("belt", "ripe", "leaf"), ((0, 0, 0), (255, 0, 0), (0, 0, 255)))


def test_class_map_through_its_table(tmp_path):
    cmap = np.array([[[255, 0, 0], [0, 0, 0], [0, 0, 255]], [[0, 0, 0], [255, 0, 0], [0, 0, 0]]], np.uint8)
    TABLE.save(tmp_path / "classes.json")
    save_png(tmp_path / "img.png", IMG)
    save_png(tmp_path / "cmap.png", cmap)
    px = load_labels(tmp_path / "img.png", tmp_path / "cmap.png", table=tmp_path / "classes.json")
    assert px.classes == ("belt", "ripe", "leaf")
    assert px.labels.tolist() == [1, 0, 2, 0, 1, 0]
    assert load_class_table(tmp_path / "classes.json") == TABLE


def test_class_colour_missing_from_the_table():
    cmap = np.zeros((2, 3, 3), np.uint8)
    cmap[1, 2] = (0, 255, 0)
    with pytest.raises(ValueError, match=r"^class map: colour #00ff00 at x=2, y=1 is not in the class table$"):
        labels_from_class_map(IMG, cmap, TABLE)


def test_class_table_errors(tmp_path):
    (tmp_path / "t.json").write_text(
        '{"kind": "fxnet.classes", "version": 1, "classes": '
        '[{"name": "a", "colour": "#000000"}, {"name": "b", "colour": "red"}]}'
    )
    with pytest.raises(
        ValueError, match=r"^.*t\.json: classes\[1\]\.colour must be a colour like '#ff0000', not 'red'$"
    ):
        load_class_table(tmp_path / "t.json")
    (tmp_path / "u.json").write_text(
        '{"classes": [{"name": "a", "colour": "#000000"}, {"name": "a", "colour": "#ffffff"}]}'
    )
    with pytest.raises(ValueError, match=r"^.*u\.json: class names must be unique, not \['a', 'a'\]$"):
        load_class_table(tmp_path / "u.json")


def test_csv_rows_with_names_and_header(tmp_path):
    (tmp_path / "px.csv").write_text("r,g,b,label\n200,10,10,ripe\n10,200,10,other\n 250, 0, 0 ,ripe\n")
    px = labels_from_csv(tmp_path / "px.csv")
    assert px.codes.tolist() == [[200, 10, 10], [10, 200, 10], [250, 0, 0]]
    assert px.classes == ("ripe", "other")
    assert px.labels.tolist() == [0, 1, 0]
    fixed = labels_from_csv(tmp_path / "px.csv", classes=("other", "ripe"))
    assert fixed.labels.tolist() == [1, 0, 1]


def test_csv_rows_with_indices(tmp_path):
    (tmp_path / "px.csv").write_text("1,2,3,0\n4,5,6,2\n")
    px = load_labels(None, tmp_path / "px.csv")
    assert px.classes == ("class0", "class1", "class2")
    assert px.labels.tolist() == [0, 2]


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("1,2,3\n", r"line 1 must have 4 fields r,g,b,label, not 3"),
        ("1,2,256,a\n1,1,1,b\n", r"line 1 column b must be a code 0\.\.255, not '256'"),
        ("r,g,b,label\n1,x,3,a\n", r"line 2 column g must be a code 0\.\.255, not 'x'"),
        ("1,2,3,a\n1,2,3,a\n", r"labels must name at least 2 classes, not 1"),
        ("r,g,b,label\n", r"no r,g,b,label rows"),
    ],
)
def test_csv_errors(tmp_path, text, message):
    (tmp_path / "bad.csv").write_text(text)
    with pytest.raises(FileFormatError, match=rf"^.*bad\.csv: {message}$"):
        labels_from_csv(tmp_path / "bad.csv")


def test_csv_label_not_among_the_classes(tmp_path):
    (tmp_path / "bad.csv").write_text("1,2,3,ripe\n1,2,3,leaf\n")
    with pytest.raises(FileFormatError, match=r"^.*bad\.csv: line 2 label must be one of other, ripe, not 'leaf'$"):
        labels_from_csv(tmp_path / "bad.csv", classes=("other", "ripe"))


def _pixels(n0=500, n1=50):
    rng = np.random.default_rng(3)
    codes = rng.integers(0, 256, (n0 + n1, 3)).astype(np.uint8)
    return LabelledPixels(codes, np.array([0] * n0 + [1] * n1), ("other", "ripe"), "test")


def test_sampling_is_balanced_split_and_deterministic():
    px = _pixels()
    a = sample_pixels(px, 1000, validation=0.2, seed=5)
    b = sample_pixels(px, 1000, validation=0.2, seed=5)
    c = sample_pixels(px, 1000, validation=0.2, seed=6)
    np.testing.assert_array_equal(a.train_codes, b.train_codes)
    np.testing.assert_array_equal(a.val_labels, b.val_labels)
    assert not np.array_equal(a.train_codes, c.train_codes)
    assert np.bincount(a.train_labels).tolist() == [400, 400]
    assert np.bincount(a.val_labels).tolist() == [100, 100]
    # no pixel is in both sets: the split is made over distinct pixels first
    rows = {tuple(r) for r in px.codes.tolist()}
    assert len(rows) == len(px.codes)  # random colours are distinct, so rows identify pixels
    train_rows = {tuple(r) for r in a.train_codes.tolist()}
    val_rows = {tuple(r) for r in a.val_codes.tolist()}
    assert not train_rows & val_rows


def test_unbalanced_sampling_draws_without_replacement():
    px = _pixels()
    s = sample_pixels(px, 300, validation=0.25, balance=False, seed=0)
    assert len(s.train_codes) == 225 and len(s.val_codes) == 75
    assert len({tuple(r) for r in np.concatenate([s.train_codes, s.val_codes]).tolist()}) == 300


def test_an_empty_class_is_an_error():
    px = LabelledPixels(IMG.reshape(-1, 3), np.zeros(6, np.int64), ("other", "ripe"), "img.png")
    with pytest.raises(ValueError, match=r"^class 'ripe' must have at least 2 pixels in img\.png, not 0$"):
        sample_pixels(px, 100)
    with pytest.raises(ValueError, match=r"^validation must be a fraction between 0 and 1, not 1\.0$"):
        sample_pixels(_pixels(), 100, validation=1.0)
