"""fileio: the bounded strict JSON loader (exact one-line errors)."""

import json

import pytest

from fxnet_widgets.core.fileio import FileFormatError, load_json

NET_DOC = {
    "kind": "fxnet.network",
    "version": 1,
    "input": {"names": ["red", "green", "blue"], "bits": 8, "scale": "pow2"},
    "layers": [
        {"weights": [[0.1, -2.0, 3.5], [1, 1, 1], [0, 0, 1]], "bias": [0.2, 0.0, -1.0], "activation": "sigmoid"},
        {"weights": [[1.0, -1.0, 0.5]], "bias": [0.0], "activation": "sigmoid"},
    ],
    "output": {"classes": ["other", "target"], "threshold": 0.5},
}
PLAN_LAYER = {"weight_bits": 8, "weight_frac": 5, "acc_bits": 18, "out_bits": 8, "table_bits": 14, "table_frac": 9}


def write(tmp_path, name, obj):
    p = tmp_path / name
    p.write_text(obj if isinstance(obj, str) else json.dumps(obj))
    return p


def test_json_loader_bounds(tmp_path):
    p = write(tmp_path, "deep.json", "[" * 100 + "]" * 100)
    with pytest.raises(FileFormatError, match=r"deep\.json: JSON nesting deeper than 64 levels$"):
        load_json(p)
    p = write(tmp_path, "dup.json", '{"a": 1, "a": 2}')
    with pytest.raises(FileFormatError, match=r"dup\.json: duplicate key 'a'$"):
        load_json(p)
    p = tmp_path / "bin.json"
    p.write_bytes(b"\xff\xfe{}")
    with pytest.raises(FileFormatError, match=r"bin\.json: not UTF-8 text \(byte 0\)$"):
        load_json(p)
    with pytest.raises(FileFormatError, match=r"nope\.json: no such file$"):
        load_json(tmp_path / "nope.json")
