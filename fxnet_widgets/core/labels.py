"""Labelled pixels: from a mask image, a colour-coded class map or a CSV file.

Three ways in, one value out: :class:`LabelledPixels` (N x 3 uint8 codes, N
class indices, the class names). :func:`sample_pixels` then draws a class-balanced
training set and a validation split, deterministic by seed.

* **Mask**: an image the size of the photo; black (0) = first class, white
  (255) = second class (any other grey is an error: save masks as PNG, not JPEG).
* **Class map**: an image whose colours name classes through a colour table
  (``classes.json``: ``{"kind": "fxnet.classes", "version": 1, "classes":
  [{"name": "other", "colour": "#000000"}, ...]}``); a colour missing from the
  table is an error naming the pixel.
* **CSV**: rows ``r,g,b,label`` (an optional header row ``r,g,b,label``); the
  label is a class name or a class index.

Examples
--------
>>> img = np.array([[[200, 10, 10], [10, 200, 10]]], dtype=np.uint8)
>>> px = labels_from_mask(img, np.array([[255, 0]], dtype=np.uint8), classes=("other", "ripe"))
>>> px.codes.tolist(), px.labels.tolist(), px.classes
([[200, 10, 10], [10, 200, 10]], [1, 0], ('other', 'ripe'))
"""

from __future__ import annotations

import csv
import io
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .fileio import FileFormatError, atomic_write_json, load_json
from .images import RGBImage, read_image

__all__ = [
    "ClassTable",
    "LabelledPixels",
    "PixelSplit",
    "labels_from_mask",
    "labels_from_class_map",
    "labels_from_csv",
    "load_class_table",
    "load_labels",
    "sample_pixels",
]

MAX_CSV_BYTES = 256 * 1024 * 1024
_HEX = re.compile(r"^#[0-9a-fA-F]{6}$")


@dataclass(frozen=True, eq=False)
class LabelledPixels:
    """Pixels with a class each.

    Attributes
    ----------
    codes : numpy.ndarray
        N x 3 uint8 RGB codes.
    labels : numpy.ndarray
        N int64 class indices into ``classes``.
    classes : tuple of str
        Class names (index order).
    source : str
        Where they came from (for messages).
    """

    codes: np.ndarray
    labels: np.ndarray
    classes: tuple[str, ...]
    source: str = ""

    def counts(self) -> dict[str, int]:
        """Number of pixels per class."""
        n = np.bincount(self.labels, minlength=len(self.classes))
        return {c: int(k) for c, k in zip(self.classes, n, strict=False)}


@dataclass(frozen=True, eq=False)
class PixelSplit:
    """A training set and a validation set drawn from :class:`LabelledPixels`."""

    train_codes: np.ndarray
    train_labels: np.ndarray
    val_codes: np.ndarray
    val_labels: np.ndarray
    classes: tuple[str, ...]


@dataclass(frozen=True)
class ClassTable:
    """Colour -> class table of a class-map image."""

    names: tuple[str, ...]
    colours: tuple[tuple[int, int, int], ...]

    def __post_init__(self) -> None:
        if len(self.names) < 2:
            raise ValueError(f"classes must name at least 2 classes, not {len(self.names)}")
        if len(set(self.names)) != len(self.names):
            raise ValueError(f"class names must be unique, not {list(self.names)!r}")
        if len(set(self.colours)) != len(self.colours):
            raise ValueError("class colours must be unique")

    @classmethod
    def from_dict(cls, doc: Any) -> ClassTable:
        """Validate a ``fxnet.classes`` document."""
        if not isinstance(doc, dict):
            raise TypeError(f"class table must be a JSON object, not {doc!r}")
        for key in doc:
            if key not in ("kind", "version", "classes"):
                raise ValueError(f"{key} is not a class table key (known: classes, kind, version)")
        if doc.get("kind", "fxnet.classes") != "fxnet.classes":
            raise ValueError(f"kind must be 'fxnet.classes', not {doc.get('kind')!r}")
        if doc.get("version", 1) != 1:
            raise ValueError(f"version must be 1, not {doc.get('version')!r}")
        items = doc.get("classes")
        if not isinstance(items, list):
            raise TypeError(f"classes must be a list of {{name, colour}} objects, not {items!r}")
        names, colours = [], []
        for i, item in enumerate(items):
            if not isinstance(item, dict) or set(item) != {"name", "colour"}:
                raise ValueError(
                    f"classes[{i}] must be an object with keys name and colour, not {item!r}"
                )
            name, colour = item["name"], item["colour"]
            if not isinstance(name, str) or not name:
                raise TypeError(f"classes[{i}].name must be a non-empty string, not {name!r}")
            if not isinstance(colour, str) or not _HEX.match(colour):
                raise ValueError(
                    f"classes[{i}].colour must be a colour like '#ff0000', not {colour!r}"
                )
            names.append(name)
            colours.append((int(colour[1:3], 16), int(colour[3:5], 16), int(colour[5:7], 16)))
        return cls(tuple(names), tuple(colours))

    def to_dict(self) -> dict[str, Any]:
        """The ``classes.json`` document."""
        return {
            "kind": "fxnet.classes",
            "version": 1,
            "classes": [
                {"name": n, "colour": "#{:02x}{:02x}{:02x}".format(*c)}
                for n, c in zip(self.names, self.colours, strict=False)
            ],
        }

    def save(self, path: str | os.PathLike[str]) -> None:
        """Write ``classes.json`` atomically."""
        atomic_write_json(path, self.to_dict())


def load_class_table(path: str | os.PathLike[str]) -> ClassTable:
    """Read a ``classes.json`` colour -> class table; errors name the file."""
    doc = load_json(path)
    try:
        return ClassTable.from_dict(doc)
    except (TypeError, ValueError) as exc:
        raise type(exc)(f"{os.fspath(path)}: {exc}") from None


def _image(x: Any, what: str) -> tuple[np.ndarray, str]:
    if isinstance(x, RGBImage):
        return np.asarray(x.codes), x.name or what
    if isinstance(x, (str, os.PathLike)):
        img = read_image(x)
        return np.asarray(img.codes), os.fspath(x)
    arr = np.asarray(x)
    if arr.dtype != np.uint8:
        raise TypeError(f"{what} must be uint8 codes, not {arr.dtype}")
    if arr.ndim == 2:
        arr = np.repeat(arr[..., None], 3, axis=2)
    if arr.ndim != 3 or arr.shape[2] != 3:
        raise ValueError(f"{what} must be H x W x 3 (or H x W), not shape {arr.shape}")
    return arr, what


def labels_from_mask(
    image: Any, mask: Any, *, classes: Sequence[str] = ("other", "target")
) -> LabelledPixels:
    """Label every pixel of ``image`` from a black/white mask of the same size.

    Parameters
    ----------
    image : path, RGBImage or numpy.ndarray
        The photo (H x W x 3 uint8 codes).
    mask : path, RGBImage or numpy.ndarray
        Black (0) pixels get ``classes[0]``, white (255) pixels ``classes[1]``.
    classes : pair of str
        Names of the two classes.
    """
    codes, iname = _image(image, "image")
    m, mname = _image(mask, "mask")
    classes = tuple(classes)
    if len(classes) != 2:
        raise ValueError(f"classes must name 2 classes for a mask, not {len(classes)}")
    if m.shape[:2] != codes.shape[:2]:
        raise ValueError(
            f"{mname}: mask must be the size of the image {iname} "
            f"({codes.shape[1]}x{codes.shape[0]}), not {m.shape[1]}x{m.shape[0]}"
        )
    bad = ~(((m == 0) | (m == 255)).all(axis=2) & (m[..., 0:1] == m).all(axis=2))
    if bad.any():
        y, x = (int(v) for v in np.argwhere(bad)[0])
        raise ValueError(
            f"{mname}: mask pixels must be black (0) or white (255), "
            f"not {tuple(int(c) for c in m[y, x])} at x={x}, y={y} (save masks as PNG)"
        )
    labels = (m[..., 0] == 255).astype(np.int64).ravel()
    return LabelledPixels(codes.reshape(-1, 3).copy(), labels, classes, iname)


def labels_from_class_map(image: Any, class_map: Any, table: ClassTable) -> LabelledPixels:
    """Label every pixel of ``image`` from a colour-coded class map and its table."""
    if not isinstance(table, ClassTable):
        raise TypeError(f"table must be a ClassTable, not {table!r}")
    codes, iname = _image(image, "image")
    cm, cname = _image(class_map, "class map")
    if cm.shape[:2] != codes.shape[:2]:
        raise ValueError(
            f"{cname}: class map must be the size of the image {iname} "
            f"({codes.shape[1]}x{codes.shape[0]}), not {cm.shape[1]}x{cm.shape[0]}"
        )
    key = (
        (cm[..., 0].astype(np.int64) << 16)
        | (cm[..., 1].astype(np.int64) << 8)
        | cm[..., 2].astype(np.int64)
    )
    table_keys = np.array([(r << 16) | (g << 8) | b for r, g, b in table.colours], dtype=np.int64)
    order = np.argsort(table_keys)
    sorted_keys = table_keys[order]
    pos = np.clip(np.searchsorted(sorted_keys, key), 0, len(sorted_keys) - 1)
    found = sorted_keys[pos] == key
    if not found.all():
        y, x = (int(v) for v in np.argwhere(~found)[0])
        colour = "#{:02x}{:02x}{:02x}".format(*(int(c) for c in cm[y, x]))
        raise ValueError(f"{cname}: colour {colour} at x={x}, y={y} is not in the class table")
    labels = order[pos].astype(np.int64).ravel()
    return LabelledPixels(codes.reshape(-1, 3).copy(), labels, table.names, iname)


def labels_from_csv(
    path: str | os.PathLike[str], *, classes: Sequence[str] | None = None
) -> LabelledPixels:
    """Read ``r,g,b,label`` rows (codes 0..255; label a name or an index).

    With ``classes`` given, names must be among them and indices below their count;
    otherwise the classes are the names in order of first appearance (or
    ``class0, class1, ...`` for integer labels).
    """
    name = os.fspath(path)
    try:
        size = os.path.getsize(name)
        if size > MAX_CSV_BYTES:
            raise FileFormatError(
                f"{name}: file is {size} bytes, more than the limit of {MAX_CSV_BYTES}"
            )
        with open(name, "rb") as fh:
            text = fh.read().decode("utf-8-sig")
    except FileNotFoundError:
        raise FileFormatError(f"{name}: no such file") from None
    except IsADirectoryError:
        raise FileFormatError(f"{name}: is a directory, not a file") from None
    except UnicodeDecodeError as exc:
        raise FileFormatError(f"{name}: not UTF-8 text (byte {exc.start})") from None
    rows = [r for r in csv.reader(io.StringIO(text)) if r and any(c.strip() for c in r)]
    if rows and [c.strip().lower() for c in rows[0]] == ["r", "g", "b", "label"]:
        start = 1
    else:
        start = 0
    codes = np.empty((len(rows) - start, 3), dtype=np.uint8)
    raw_labels: list[str] = []
    for i, row in enumerate(rows[start:]):
        line = i + start + 1
        if len(row) != 4:
            raise FileFormatError(
                f"{name}: line {line} must have 4 fields r,g,b,label, not {len(row)}"
            )
        for j in range(3):
            cell = row[j].strip()
            if not re.fullmatch(r"\d{1,3}", cell) or int(cell) > 255:
                raise FileFormatError(
                    f"{name}: line {line} column {'rgb'[j]} must be a code 0..255, not {cell!r}"
                )
            codes[i, j] = int(cell)
        raw_labels.append(row[3].strip())
    if not raw_labels:
        raise FileFormatError(f"{name}: no r,g,b,label rows")
    all_int = all(re.fullmatch(r"\d+", s) for s in raw_labels)
    if classes is not None:
        names = tuple(classes)
    elif all_int:
        names = tuple(f"class{k}" for k in range(max(int(s) for s in raw_labels) + 1))
    else:
        names = tuple(dict.fromkeys(raw_labels))
    lookup = {n: k for k, n in enumerate(names)}
    labels = np.empty(len(raw_labels), dtype=np.int64)
    for i, s in enumerate(raw_labels):
        if s in lookup:
            labels[i] = lookup[s]
        elif re.fullmatch(r"\d+", s) and int(s) < len(names):
            labels[i] = int(s)
        else:
            raise FileFormatError(
                f"{name}: line {i + start + 1} label must be one of {', '.join(names)}, not {s!r}"
            )
    if len(names) < 2:
        raise FileFormatError(f"{name}: labels must name at least 2 classes, not {len(names)}")
    return LabelledPixels(codes, labels, names, name)


def load_labels(
    image: str | os.PathLike[str] | None,
    labels: str | os.PathLike[str],
    *,
    table: str | os.PathLike[str] | ClassTable | None = None,
    classes: Sequence[str] | None = None,
) -> LabelledPixels:
    """Labelled pixels from files: a mask, a class map (with ``table``) or a CSV.

    ``labels`` ending in ``.csv`` is read by :func:`labels_from_csv` (``image`` is
    not needed); otherwise it is a class map when ``table`` is given, else a mask
    (``classes`` default ``("other", "target")``).
    """
    if os.fspath(labels).lower().endswith(".csv"):
        return labels_from_csv(labels, classes=classes)
    if image is None:
        raise ValueError(f"image must be given with the label image {os.fspath(labels)}")
    if table is not None:
        tab = table if isinstance(table, ClassTable) else load_class_table(table)
        return labels_from_class_map(image, labels, tab)
    return labels_from_mask(
        image, labels, classes=tuple(classes) if classes else ("other", "target")
    )


def sample_pixels(
    pixels: LabelledPixels,
    n: int = 100_000,
    *,
    validation: float = 0.2,
    balance: bool = True,
    seed: int = 0,
) -> PixelSplit:
    """Draw a training set and a validation split, deterministic by seed.

    Parameters
    ----------
    pixels : LabelledPixels
        Where to draw from; every class must have at least 2 pixels.
    n : int
        Total samples (training + validation). With ``balance`` each class gets
        ``n // n_classes`` draws (with replacement when a class has fewer pixels);
        without it, ``n`` pixels are drawn without replacement (or all of them).
    validation : float
        Fraction kept for validation, in (0, 1). The split is made per class over
        distinct pixels, so no pixel is in both sets.
    balance : bool
        Equal counts per class.
    seed : int
        Seed of the draw.
    """
    if not isinstance(pixels, LabelledPixels):
        raise TypeError(f"pixels must be LabelledPixels, not {type(pixels).__name__}")
    if not isinstance(n, int) or isinstance(n, bool) or n < 2 * len(pixels.classes):
        raise ValueError(f"n must be an integer of at least {2 * len(pixels.classes)}, not {n!r}")
    if not isinstance(validation, (int, float)) or not 0 < validation < 1:
        raise ValueError(f"validation must be a fraction between 0 and 1, not {validation!r}")
    rng = np.random.default_rng(seed)
    counts = np.bincount(pixels.labels, minlength=len(pixels.classes))
    for c, k in zip(pixels.classes, counts, strict=False):
        if k < 2:
            where = f" in {pixels.source}" if pixels.source else ""
            raise ValueError(f"class {c!r} must have at least 2 pixels{where}, not {int(k)}")
    tr_idx, va_idx = [], []
    if balance:
        per = n // len(pixels.classes)
        for ci in range(len(pixels.classes)):
            idx = rng.permutation(np.flatnonzero(pixels.labels == ci))
            n_val_pool = max(1, int(round(len(idx) * validation)))
            val_pool, tr_pool = idx[:n_val_pool], idx[n_val_pool:]
            n_va = max(1, int(round(per * validation)))
            n_tr = max(1, per - n_va)
            va_idx.append(rng.choice(val_pool, n_va, replace=n_va > len(val_pool)))
            tr_idx.append(rng.choice(tr_pool, n_tr, replace=n_tr > len(tr_pool)))
    else:
        idx = rng.permutation(len(pixels.labels))[: min(n, len(pixels.labels))]
        n_va = max(1, int(round(len(idx) * validation)))
        va_idx.append(idx[:n_va])
        tr_idx.append(idx[n_va:])
    tr = rng.permutation(np.concatenate(tr_idx))
    va = np.concatenate(va_idx)
    return PixelSplit(
        pixels.codes[tr], pixels.labels[tr], pixels.codes[va], pixels.labels[va], pixels.classes
    )
