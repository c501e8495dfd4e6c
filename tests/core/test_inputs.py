"""The one input loader (CLI and export) and the version read from package metadata."""

from importlib import metadata

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.cli import _common
from fxnet_widgets.core.images import save_png
from fxnet_widgets.core.inputs import load_codes

NET = fw.Network.from_layers([([[1.0, 1.0, 1.0]], [0.0], "sigmoid")])


def test_one_loader_for_images_and_codes(tmp_path):
    img = np.arange(2 * 3 * 3, dtype=np.uint8).reshape(2, 3, 3)
    save_png(tmp_path / "a.png", img)
    got = load_codes(tmp_path / "a.png", NET)
    assert np.array_equal(got.codes, img) and got.source == "image file a.png" and got.note == ""
    np.save(tmp_path / "c.npy", img.reshape(-1, 3))
    got = load_codes(tmp_path / "c.npy", NET)
    assert np.array_equal(got.codes, img.reshape(-1, 3)) and got.source == "codes file c.npy"
    # the command line gives the same arrays (it calls the same loader)
    for name in ("a.png", "c.npy"):
        codes, note = _common.load_input(str(tmp_path / name), NET)
        assert np.array_equal(codes, load_codes(tmp_path / name, NET).codes) and note == ""
    with pytest.raises(FileNotFoundError, match=r"nothing\.png: no such file$"):
        load_codes(tmp_path / "nothing.png", NET)
    np.save(tmp_path / "flat.npy", np.zeros(3, np.uint8))
    with pytest.raises(ValueError, match=r"flat\.npy: codes must be N x 3, not shape \(3,\)$"):
        load_codes(tmp_path / "flat.npy", NET)
    five = fw.Network.from_layers([([[1.0] * 5], [0.0], "sigmoid")])
    with pytest.raises(ValueError, match=r"a\.png: an image gives 3 inputs of 8 bits, but the network has 5 inputs"):
        load_codes(tmp_path / "a.png", five)


def test_version_comes_from_the_package_metadata():
    # importlib.metadata reads the installed distribution's version (Python documentation)
    assert fw.__version__ == metadata.version("fxnet-widgets")
