"""``fxnet export`` as a user runs it: the hand-off directory, refusal, --force, one-line errors."""

import json

import numpy as np
import pytest
from fxhand import hand_files

import fxnet_widgets as fw
from fxnet_widgets.cli import main
from fxnet_widgets.core.export import read_export


@pytest.fixture()
def files(tmp_path):
    net, plan, img = hand_files(tmp_path, table_bits=10, table_frac=6)
    return tmp_path, net, plan, img


def test_export_with_image_vectors(files, capsys):
    d, net, plan, img = files
    code = main(
        ["export", str(d / "net.json"), str(d / "plan.json"), "-o", str(d / "hw"), "--vectors", str(d / "img.png")]
    )
    out, err = capsys.readouterr()
    assert code == 0, err
    assert out.splitlines()[0] == f"exported 15 files to {d / 'hw'} (42 golden vectors)"
    assert "  tables/layer1_table.memh" in out.splitlines()
    back = read_export(d / "hw")
    np.testing.assert_array_equal(back.vectors["inputs"], img.reshape(-1, 3))
    np.testing.assert_array_equal(back.vectors["decisions"][:, 0], fw.emulate(net, plan, img).decisions.ravel())


def test_export_json_without_vectors(files, capsys):
    d, *_ = files
    code = main(["export", str(d / "net.json"), str(d / "plan.json"), "-o", str(d / "hw"), "--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    doc = json.loads(out)
    assert doc["vectors"] is None and doc["input"] is None
    assert doc["files"] == [
        "manifest.json", "fxnet_design.h", "fxnet_design.vh", "fxnet_design_pkg.vhd", "network.json",
        "plan.json", "tables/layer1_table.memh", "tables/layer2_table.memh",
    ]  # fmt: skip


def test_export_refuses_then_forces(files, capsys):
    d, *_ = files
    args = ["export", str(d / "net.json"), str(d / "plan.json"), "-o", str(d / "hw")]
    assert main(args) == 0
    capsys.readouterr()
    assert main(args) == 2
    out, err = capsys.readouterr()
    assert err == f"fxnet: {d / 'hw'}: the directory is not empty (use force=True or --force to replace it)\n"
    assert out == ""
    assert main([*args, "--force", "--vectors", str(d / "codes.npy")]) == 0
    assert read_export(d / "hw").vectors["inputs"].shape == (42, 3)


def test_export_bad_inputs_are_one_line(files, capsys):
    d, *_ = files
    np.save(d / "bad.npy", np.full((2, 3), 300))
    code = main(
        ["export", str(d / "net.json"), str(d / "plan.json"), "-o", str(d / "hw"), "--vectors", str(d / "bad.npy")]
    )
    err = capsys.readouterr().err
    assert code == 2
    assert err == f"fxnet: {d / 'bad.npy'}: codes must be between 0 and 255 (8-bit unsigned), not 300\n"
    code = main(["export", str(d / "net.json"), str(d / "missing.json"), "-o", str(d / "hw")])
    err = capsys.readouterr().err
    assert code == 2 and err == f"fxnet: {d / 'missing.json'}: no such file\n"
    code = main(["export", str(d / "net.json"), str(d / "plan.json"), "-o", str(d / "no" / "hw")])
    err = capsys.readouterr().err
    assert code == 2 and err == f"fxnet: {d / 'no' / 'hw'}: the directory {d / 'no'} does not exist\n"
    assert not (d / "hw").exists()
