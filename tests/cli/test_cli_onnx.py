"""``fxnet import`` and ``fxnet export-onnx`` as a user runs them, checked with ONNX Runtime."""

from pathlib import Path

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.cli import main

onnx = pytest.importorskip("onnx")
ort = pytest.importorskip("onnxruntime")

ASSETS = Path(__file__).resolve().parents[2] / "assets"


def _ort(path, x):
    sess = ort.InferenceSession(str(path), providers=["CPUExecutionProvider"])
    return sess.run(None, {"input": x})[0]


def test_export_onnx_then_import_gives_the_network_back(tmp_path, capsys):
    net = fw.Network.load(ASSETS / "network.json")
    model, back = tmp_path / "net.onnx", tmp_path / "back.json"
    assert main(["export-onnx", str(ASSETS / "network.json"), "-o", str(model), "--float64"]) == 0
    out, err = capsys.readouterr()
    assert out.startswith(f"wrote {model}: <Network ") and err == ""
    codes = fw.read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    # ONNX Runtime runs the written file (the outside reference); double tensors, so 1e-6 relative
    np.testing.assert_allclose(_ort(model, codes * net.input_factor()), net.predict(codes), rtol=1e-6)
    assert main(["import", str(model), "-o", str(back), "--input-scale", net.input_scale]) == 0
    out, err = capsys.readouterr()
    assert out.startswith(f"imported {model}: <Network ") and err == ""
    assert fw.Network.load(back) == net


def test_import_float32_model_that_takes_raw_codes(tmp_path, capsys):
    net = fw.Network.load(ASSETS / "network.json")
    model, back = tmp_path / "net.onnx", tmp_path / "back.json"
    fw.save_onnx(net.replace_layers([(L.weights / 64.0, L.bias, L.activation) if i == 0 else L
                                     for i, L in enumerate(net.layers)]), model)
    assert main(["import", str(model), "-o", str(back), "--input-scale", "codes"]) == 0
    codes = fw.read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    # --input-scale codes: the file's input is the code itself; ONNX Runtime runs it in float32
    ref = _ort(model, codes.astype(np.float32))
    np.testing.assert_allclose(fw.Network.load(back).predict(codes), ref, rtol=1e-6, atol=1e-6)


@pytest.mark.parametrize(
    ("argv", "expect"),
    [
        (["import", "{d}/missing.onnx", "-o", "{d}/n.json"], "fxnet: {d}/missing.onnx: no such file"),
        (["import", "{d}/cut.onnx", "-o", "{d}/n.json"], "fxnet: {d}/cut.onnx: is not a readable ONNX model ("),
        (["import", "{d}/cut.onnx", "-o", "{d}/n.txt"], "fxnet: {d}/n.txt: the output file name must end in .json"),
        (["import", "{d}/cut.onnx", "-o", "{d}/n.json", "--input-scale", "raw"], "fxnet import: argument"),
        (["export-onnx", "{d}/missing.json", "-o", "{d}/m.onnx"], "fxnet: "),
        (["export-onnx", str(ASSETS / "network.json"), "-o", "{d}/m.bin"],
         "fxnet: {d}/m.bin: the output file name must end in .onnx"),
    ],
)
def test_bad_input_is_one_line_and_exit_2(tmp_path, capsys, argv, expect):
    net = fw.Network.load(ASSETS / "network.json")
    fw.save_onnx(net, tmp_path / "whole.onnx")
    (tmp_path / "cut.onnx").write_bytes((tmp_path / "whole.onnx").read_bytes()[:40])
    code = main([a.format(d=tmp_path) for a in argv])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith(expect.format(d=tmp_path)), err
    assert not (tmp_path / "n.json").exists() and not (tmp_path / "m.onnx").exists()
