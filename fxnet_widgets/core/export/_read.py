"""Reading an export directory back: the manifest, the table images and the vector images."""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..fileio import FileFormatError, load_json
from ._design import FILES
from ._memh import parse_memh

__all__ = ["MANIFEST_KIND", "ExportedDesign", "ExportedLayer", "read_export"]

MANIFEST_KIND = "fxnet.export"


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


# ---------------------------------------------------------------------------------
# reading back
@dataclass(frozen=True, eq=False)
class ExportedLayer:
    """One layer as read back from the files (integers only)."""

    number: int
    activation: str
    weights: np.ndarray
    biases: np.ndarray
    weight_bits: int
    acc_bits: int
    acc_overflow: str
    shift: int
    index_round: str
    index_min: int
    index_max: int
    table: np.ndarray | None
    out_bits: int
    out_frac: int
    out_signed: bool
    out_min: int
    out_max: int


@dataclass(frozen=True, eq=False)
class ExportedDesign:
    """An export directory read back: manifest, layers (tables from the memory images), vectors."""

    directory: Path
    manifest: dict[str, Any]
    layers: tuple[ExportedLayer, ...]
    vectors: dict[str, np.ndarray]  # name -> (N, per_sample) int64, from the $readmemh images
    threshold_code: int | None


def _get(doc: Any, key: str, where: str, kind: type | tuple[type, ...]) -> Any:
    if not isinstance(doc, dict) or key not in doc:
        raise ValueError(f"{where}.{key} is missing")
    v = doc[key]
    if not isinstance(v, kind) or (kind is int and isinstance(v, bool)):
        raise TypeError(f"{where}.{key} must be {getattr(kind, '__name__', kind)}, not {v!r}")
    return v


def read_export(directory: str | os.PathLike[str], *, check_hashes: bool = True) -> ExportedDesign:
    """Read an export directory back (manifest, table images, vector images).

    With ``check_hashes`` every file's SHA-256 is compared with the manifest's;
    a changed file is an error that names it.
    """
    root = Path(directory)
    mpath = root / FILES["manifest"]
    m = load_json(mpath)
    where = os.fspath(mpath)
    if not isinstance(m, dict) or m.get("kind") != MANIFEST_KIND:
        raise FileFormatError(
            f"{where}: kind must be {MANIFEST_KIND!r}, not {m.get('kind') if isinstance(m, dict) else m!r}"
        )
    if m.get("version") != 1:
        raise FileFormatError(f"{where}: version must be 1, not {m.get('version')!r}")
    if check_hashes:
        for i, entry in enumerate(_get(m, "files", where, list)):
            if "sha256" not in entry:
                continue
            rel = _get(entry, "file", f"{where}: files[{i}]", str)
            path = _inside(root, rel, where)
            if _sha256(path.read_bytes()) != entry["sha256"]:
                raise FileFormatError(f"{path}: the file differs from the one the manifest lists (sha256)")
    layers = []
    for li, ld in enumerate(_get(m, "layers", where, list)):
        w = f"{where}: layers[{li}]"
        neurons = _get(ld, "neurons", w, list)
        weights = np.array(
            [_get(nd, "weights", f"{w}.neurons[{j}]", list) for j, nd in enumerate(neurons)], dtype=np.int64
        )
        biases = np.array([_get(nd, "bias", f"{w}.neurons[{j}]", int) for j, nd in enumerate(neurons)], dtype=np.int64)
        out = _get(ld, "output", w, dict)
        idx = _get(ld, "index", w, dict)
        acc = _get(ld, "accumulator", w, dict)
        table = None
        tdoc = ld.get("table")
        if tdoc is not None:
            rel = _get(tdoc, "file", f"{w}.table", str)
            path = _inside(root, rel, where)
            table = parse_memh(
                path.read_text(encoding="utf-8"), _get(tdoc, "word_bits", f"{w}.table", int),
                signed=_get(tdoc, "signed", f"{w}.table", bool), where=os.fspath(path),
                words=_get(tdoc, "entries", f"{w}.table", int),
            )  # fmt: skip
        layers.append(
            ExportedLayer(
                number=li + 1, activation=_get(ld, "activation", w, str), weights=weights, biases=biases,
                weight_bits=_get(_get(ld, "weight", w, dict), "bits", f"{w}.weight", int),
                acc_bits=_get(acc, "bits", f"{w}.accumulator", int),
                acc_overflow=_get(acc, "overflow", f"{w}.accumulator", str),
                shift=_get(idx, "shift", f"{w}.index", int), index_round=_get(idx, "round", f"{w}.index", str),
                index_min=_get(idx, "min", f"{w}.index", int), index_max=_get(idx, "max", f"{w}.index", int),
                table=table, out_bits=_get(out, "bits", f"{w}.output", int),
                out_frac=_get(out, "frac", f"{w}.output", int), out_signed=_get(out, "signed", f"{w}.output", bool),
                out_min=_get(out, "min", f"{w}.output", int), out_max=_get(out, "max", f"{w}.output", int),
            )
        )  # fmt: skip
    vectors: dict[str, np.ndarray] = {}
    vdoc = m.get("vectors")
    if vdoc is not None:
        n = _get(vdoc, "count", f"{where}: vectors", int)
        for key, info in vdoc.items():
            if not (isinstance(info, dict) and "word_bits" in info):
                continue
            path = _inside(root, _get(info, "file", f"{where}: vectors.{key}", str), where)
            arr = parse_memh(path.read_text(encoding="utf-8"), info["word_bits"], signed=bool(info["signed"]),
                             where=os.fspath(path), words=info["words"])  # fmt: skip
            vectors[key] = arr.reshape(n, -1) if n else arr.reshape(0, max(1, int(info.get("per_sample", 1))))
    thr = m.get("output", {}).get("threshold_code")
    return ExportedDesign(root, m, tuple(layers), vectors, thr)


def _inside(root: Path, rel: str, where: str) -> Path:
    """``root / rel``, refusing names that leave ``root``."""
    parts = Path(rel).parts
    if Path(rel).is_absolute() or ".." in parts or not parts:
        raise FileFormatError(f"{where}: file name must be relative and inside the directory, not {rel!r}")
    return root / rel
