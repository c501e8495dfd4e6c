"""``fxnet train`` and ``fxnet demo`` as a user runs them; one-line errors with exit code 2."""

import json
import subprocess
import sys

import numpy as np
import pytest

from fxnet_widgets.cli import main
from fxnet_widgets.core.demo import CLASS_MAP_FILES, DEMO_CLIP, DEMO_FILES
from fxnet_widgets.core.images import read_image, save_png
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan


def run(*args):
    p = subprocess.run([sys.executable, "-m", "fxnet_widgets.cli", *map(str, args)], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


@pytest.fixture()
def photo(tmp_path):
    rng = np.random.default_rng(0)
    img = rng.integers(0, 256, (40, 50, 3), dtype=np.uint8)
    c = img.astype(np.int64)
    # labelled by a stated rule: red exceeds green and blue by more than 40 codes
    mask = np.where((c[..., 0] > c[..., 1] + 40) & (c[..., 0] > c[..., 2] + 40), 255, 0).astype(np.uint8)
    save_png(tmp_path / "img.png", img)
    save_png(tmp_path / "mask.png", mask)
    return tmp_path, img, mask


def test_train_writes_a_network(photo):
    d, img, mask = photo
    code, out, err = run("train", d / "img.png", d / "mask.png", "-o", d / "net.json", "--classes", "other,red",
                         "--samples", "20000", "--json")  # fmt: skip
    assert code == 0, err
    report = json.loads(out)
    net = Network.load(d / "net.json")
    assert net.shape == (3, 3, 1) and net.classes == ("other", "red")
    assert report["network"] == str(d / "net.json") and report["val_accuracy"] >= 0.95
    assert np.mean(net.decide(net.predict(img)) == (mask == 255)) >= 0.95


def test_train_options_and_text_summary(photo, capsys):
    d, _, _ = photo
    code = main(["train", str(d / "img.png"), str(d / "mask.png"), "-o", str(d / "n.json"),
                 "--hidden", "4,2", "--activation", "tanh", "--seed", "3", "--samples", "2000"])  # fmt: skip
    out = capsys.readouterr().out
    assert code == 0
    net = Network.load(d / "n.json")
    assert net.shape == (3, 4, 2, 1) and [L.activation for L in net.layers] == ["tanh", "tanh", "sigmoid"]
    assert out.splitlines()[-1] == f"wrote {d / 'n.json'}"
    assert "validation accuracy" in out


def test_train_errors_are_one_line(photo, capsys):
    d, _, _ = photo
    save_png(d / "small.png", np.zeros((4, 4), np.uint8))
    cases = [
        (["train", str(d / "img.png"), str(d / "none.png"), "-o", str(d / "n.json")],
         f"fxnet: {d / 'none.png'}: no such file"),
        (["train", str(d / "img.png"), str(d / "small.png"), "-o", str(d / "n.json")],
         f"fxnet: {d / 'small.png'}: mask must be the size of the image {d / 'img.png'} (50x40), not 4x4"),
        (["train", str(d / "img.png"), str(d / "mask.png"), "-o", str(d / "n.txt")],
         f"fxnet: {d / 'n.txt'}: the output file name must end in .json"),
        (["train", str(d / "img.png"), str(d / "mask.png"), "-o", str(d / "n.json"), "--hidden", "0"],
         "fxnet train: argument --hidden: must be unit counts between 1 and 4096, not '0'"),
        (["train", str(d / "img.png"), str(d / "mask.png"), "-o", str(d / "n.json"), "--classes", "one"],
         "fxnet: --classes must name 2 or more classes, not 'one'"),
    ]  # fmt: skip
    for argv, message in cases:
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert err == message + "\n"
    assert not (d / "n.json").exists()


def test_train_on_an_empty_class(tmp_path, capsys):
    save_png(tmp_path / "img.png", np.zeros((5, 5, 3), np.uint8))
    save_png(tmp_path / "mask.png", np.zeros((5, 5), np.uint8))
    assert main(["train", str(tmp_path / "img.png"), str(tmp_path / "mask.png"), "-o", str(tmp_path / "n.json")]) == 2
    assert (
        capsys.readouterr().err
        == f"fxnet: class 'target' must have at least 2 pixels in {tmp_path / 'img.png'}, not 0\n"
    )


def test_demo_writes_the_scenario(tmp_path):
    code, out, err = run("demo", "-o", tmp_path / "demo", "--json")
    assert code == 0, err
    summary = json.loads(out)
    assert sorted(p.name for p in (tmp_path / "demo").iterdir()) == sorted([*DEMO_FILES, DEMO_CLIP])
    assert summary["files"] == [*DEMO_FILES, DEMO_CLIP]
    assert summary["float_accuracy"] >= 0.97 and summary["disagreement"] <= 0.01
    assert summary["events"]["acc_overflow"] == 0
    net = Network.load(tmp_path / "demo" / "network.json")
    Plan.load(tmp_path / "demo" / "plan.json", net)
    assert read_image(tmp_path / "demo" / "scene-test.png").shape == (360, 640)


def test_demo_text_summary_and_errors(tmp_path, capsys):
    assert main(["demo", "-o", str(tmp_path), "--class-maps"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[1].startswith("test scene (cool daylight, top right, dimmer): float accuracy ")
    assert out[2].startswith("plan: fixed-vs-float disagreement ")
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([*DEMO_FILES, DEMO_CLIP, *CLASS_MAP_FILES])
    (tmp_path / "file").write_text("x")
    assert main(["demo", "-o", str(tmp_path / "file")]) == 2
    assert capsys.readouterr().err == f"fxnet: {tmp_path / 'file'}: exists and is not a directory\n"
    assert main(["demo", "-o", str(tmp_path / "no" / "dir")]) == 2
    assert (
        capsys.readouterr().err == f"fxnet: {tmp_path / 'no' / 'dir'}: the directory {tmp_path / 'no'} does not exist\n"
    )


def test_demo_clip_is_regenerated_byte_for_byte(tmp_path):
    """The clip ``fxnet demo`` writes: the same bytes when written again, under 2 MB, and the
    frames of the scene generator exactly (FFV1 is lossless, RFC 9043); frame count and rate
    as PyAV/FFmpeg report them."""
    av = pytest.importorskip("av")
    from fxnet_widgets.core.footage import demo_frames, write_demo_clip
    from fxnet_widgets.core.footage.democlip import DEMO_RATE

    assert main(["demo", "-o", str(tmp_path / "demo")]) == 0
    written = (tmp_path / "demo" / DEMO_CLIP).read_bytes()
    again = open(write_demo_clip(tmp_path / "again.mkv"), "rb").read()
    assert written == again and len(written) < 2 * 2**20
    with av.open(str(tmp_path / "demo" / DEMO_CLIP)) as c:
        st = c.streams.video[0]
        assert float(st.average_rate) == DEMO_RATE == 25
        decoded = [f.to_ndarray(format="rgb24") for f in c.decode(st)]
    frames = demo_frames()
    assert len(decoded) == len(frames) == 40
    assert all(np.array_equal(a, b) for a, b in zip(decoded, frames))
