"""``fxnet footage`` as a user runs it: a clip in, per-frame records out, one-line errors."""

from __future__ import annotations

import contextlib
import io
import json

import numpy as np
import pytest

from fxnet_widgets.cli import main
from fxnet_widgets.core.footage import demo_frames, write_demo_clip
from fxnet_widgets.core.images import save_png

pytest.importorskip("av")

ASSETS = "assets"


def run(*args) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in args])
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def clip(tmp_path_factory):
    return write_demo_clip(tmp_path_factory.mktemp("clip") / "belt.mkv", n_frames=10, width=64, height=40)


def test_footage_writes_one_record_per_frame(clip, tmp_path):
    code, out, err = run("footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", clip, "-o", tmp_path / "r.json",
                         "--frames", "1:9:2")  # fmt: skip
    assert code == 0, err
    doc = json.loads((tmp_path / "r.json").read_text())
    assert doc["kind"] == "fxnet.footage" and doc["version"] == 1
    assert [r["index"] for r in doc["frames"]] == [1, 3, 5, 7]
    assert [r["time_s"] for r in doc["frames"]] == [0.04, 0.12, 0.2, 0.28]  # 25 frames/s, as written
    assert {"positive_fixed", "positive_float", "differ", "events", "mean_rgb", "pixels"} <= set(doc["frames"][0])
    assert doc["totals"]["frames"] == 4 and doc["source"]["codec"] == "ffv1"
    assert "4/4 frames" in err  # the text progress bar
    assert out.splitlines()[0].startswith("footage belt.mkv: 4 frames, 10240 pixels")
    assert out.rstrip().endswith(f"wrote {tmp_path / 'r.json'}")


def test_footage_npz_json_and_image_folder(tmp_path):
    for i, f in enumerate(demo_frames(3, 48, 32)):
        save_png(tmp_path / f"f{i}.png", f)
    code, out, err = run("footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", str(tmp_path / "f*.png"),
                         "-o", tmp_path / "r.npz", "--json", "--quiet")  # fmt: skip
    assert code == 0, err
    assert err == ""  # --quiet: no progress bar
    summary = json.loads(out)
    assert summary["totals"]["frames"] == 3 and summary["source"]["kind"] == "images"
    with np.load(tmp_path / "r.npz", allow_pickle=False) as z:
        assert z["index"].tolist() == [0, 1, 2] and z["pixels"].tolist() == [48 * 32] * 3


def test_footage_errors_are_one_line(clip, tmp_path):
    junk = tmp_path / "junk.mp4"
    junk.write_bytes(b"not a video" * 40)
    cases = [
        (junk, tmp_path / "r.json", "must be a video container FFmpeg can read"),
        (tmp_path / "missing.mkv", tmp_path / "r.json", "missing.mkv: no such file"),
        (clip, tmp_path / "r.txt", "the output file name must end in .json or .npz"),
        (clip, "/no/such/dir/r.json", "does not exist"),
    ]
    for source, output, said in cases:
        code, out, err = run("footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", source, "-o", output)
        assert code == 2 and err.count("\n") == 1 and said in err, err
    code, out, err = run("footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", clip, "-o", tmp_path / "r.json",
                         "--frames", "5:2")  # fmt: skip
    assert code == 2 and err == "fxnet: frames stop must be at least the start 5, not 2\n"


def test_footage_overlay_and_labels(clip, tmp_path):
    masks = tmp_path / "masks"
    masks.mkdir()
    for i in range(10):
        save_png(masks / f"m{i}.png", np.zeros((40, 64), np.uint8))  # nothing is ripe
    code, out, err = run("footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", clip, "-o", tmp_path / "r.json",
                         "--labels", masks, "--overlay", tmp_path / "o.mkv", "--quiet")  # fmt: skip
    assert code == 0, err
    doc = json.loads((tmp_path / "r.json").read_text())
    for r in doc["frames"]:  # an all-negative mask: accuracy = share of pixels called negative
        assert r["accuracy_fixed"] == round(1 - r["positive_fixed"] / r["pixels"], 6)
    assert "accuracy on the labels" in out and out.rstrip().endswith(f"and {tmp_path / 'o.mkv'}")
    from fxnet_widgets.core.footage import open_footage

    assert len(open_footage(tmp_path / "o.mkv").read()) == 10
    code, out, err = run("footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", clip, "-o", tmp_path / "r.json",
                         "--overlay", tmp_path / "o.avi")  # fmt: skip
    assert code == 2 and err.strip().endswith("the overlay file name must end in .mkv or .mp4")


def test_footage_split_over_workers_matches(clip, tmp_path):
    args = ["footage", f"{ASSETS}/network.json", f"{ASSETS}/plan.json", clip, "--quiet"]
    assert run(*args, "-o", tmp_path / "one.json")[0] == 0
    code, out, err = run(*args, "-o", tmp_path / "split.json", "--workers", "0")
    assert code == 0, err
    one, split = (json.loads((tmp_path / n).read_text()) for n in ("one.json", "split.json"))
    assert one["frames"] == split["frames"] and one["totals"] == split["totals"]
    code, out, err = run(*args, "-o", tmp_path / "x.json", "--workers", "1", "--dask", "127.0.0.1:1")
    assert code == 2 and err == "fxnet: give --workers or --dask, not both\n"
