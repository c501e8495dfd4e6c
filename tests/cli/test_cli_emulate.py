"""``fxnet emulate`` as a user runs it: files in, npz and summary out, one-line errors."""

import json
import subprocess
import sys

import numpy as np
import pytest
from fxhand import hand_files

import fxnet_widgets as fw
from fxnet_widgets.cli import main


@pytest.fixture()
def files(tmp_path):
    net, plan, img = hand_files(tmp_path)
    return tmp_path, net, plan, img


def run(*args):
    p = subprocess.run([sys.executable, "-m", "fxnet_widgets.cli", *map(str, args)], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def test_emulate_image_writes_contract_npz(files):
    d, net, plan, img = files
    code, out, err = run("emulate", d / "net.json", d / "plan.json", d / "img.png", "-o", d / "out.npz", "--json")
    assert code == 0, err
    summary = json.loads(out)
    # by hand: q_w = [[16,-8,4],[32,0,-32],[-24,16,8]], q_b = [819,-1638,2458], u in [0, 255]:
    # [-1221, 5919] -> 14 b; [-9798, 6522] -> 15 b; [-6120+2458, 8578] -> 15 b
    assert summary["samples"] == 42 and summary["layers"][0]["safe_acc_bits"] == [14, 15, 15]
    with np.load(d / "out.npz", allow_pickle=False) as z:
        keys = set(z.files)
        assert {"out_codes", "decisions", "float_out", "acc_1", "codes_1", "acc_2", "codes_2"} <= keys
        for l in (1, 2):
            for e in ("acc_overflow", "table_low", "table_high", "weight_clip"):
                assert z[f"{e}_{l}"].dtype == np.int64
        assert z["out_codes"].shape == (42, 1) and z["out_codes"].dtype == np.int64
        assert z["acc_1"].shape == (42, 3) and z["float_out"].dtype == np.float64
        r = fw.emulate(net, plan, img)
        np.testing.assert_array_equal(z["decisions"], r.decisions.ravel())
        assert summary["mismatch"] == r.mismatch


def test_emulate_npy_and_text_summary(files):
    d, *_ = files
    code, out, err = run("emulate", d / "net.json", d / "plan.json", d / "codes.npy", "-o", d / "o.npz")
    assert code == 0, err
    assert out.startswith("emulation of 42 samples:")


def test_greyscale_image_is_converted_and_said(files, tmp_path):
    d, *_ = files
    from PIL import Image

    Image.new("L", (4, 3), 90).save(tmp_path / "grey.png")
    code, out, err = run("emulate", d / "net.json", d / "plan.json", tmp_path / "grey.png", "-o", d / "g.npz", "--json")
    assert code == 0, err
    assert json.loads(out)["input"]["note"] == "mode L converted to RGB (grey copied to R, G and B)"


@pytest.mark.parametrize(
    "mutate,expect",
    [
        (lambda d: (d / "plan.json").write_text(json.dumps({"layers": [
            {"weight_bits": 99, "weight_frac": 5, "acc_bits": 18, "out_bits": 8}]})),
         "plan.json: layers[0].weight_bits must be between 1 and 32, not 99"),
        (lambda d: (d / "net.json").write_text("{"), "net.json: invalid JSON at line 1 column 2"),
        (lambda d: np.save(d / "codes.npy", np.zeros((3, 4), np.int64)),
         "codes.npy: codes must have 3 columns (one per network input), not 4"),
        (lambda d: np.save(d / "codes.npy", np.full((3, 3), 300)),
         "codes.npy: codes must be between 0 and 255 (8-bit unsigned), not 300"),
        (lambda d: (d / "codes.npy").write_bytes(b"\x93NUMPY garbage"), "codes.npy: not a readable .npy array"),
    ],
)  # fmt: skip
def test_bad_input_one_line_exit_2(files, mutate, expect):
    d, *_ = files
    mutate(d)
    code, out, err = run("emulate", d / "net.json", d / "plan.json", d / "codes.npy", "-o", d / "x.npz")
    assert code == 2
    assert len(err.strip().splitlines()) == 1, err
    assert expect in err and "Traceback" not in err
    assert not (d / "x.npz").exists()


def test_missing_input_and_bad_args(files, capsys):
    d, *_ = files
    args = [str(d / "net.json"), str(d / "plan.json"), str(d / "nope.png"), "-o", str(d / "x.npz")]
    assert main(["emulate", *args]) == 2
    assert capsys.readouterr().err.strip() == f"fxnet: {d / 'nope.png'}: no such file"
    assert main(["emulate", str(d / "net.json")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("fxnet emulate: the following arguments are required") and "\n" not in err
