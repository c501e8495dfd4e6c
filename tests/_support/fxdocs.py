"""A small valid network document, a plan layer, and a file writer shared by the file tests."""

import json

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
