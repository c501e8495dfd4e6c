"""fileio: the bounded strict JSON loader (exact one-line errors)."""

import pytest
from fxdocs import write

from fxnet_widgets.core.fileio import FileFormatError, load_json


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
