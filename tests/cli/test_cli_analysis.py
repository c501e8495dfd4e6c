"""``fxnet cost``, ``fxnet sweep`` and ``fxnet tune`` as a user runs them."""

import json
import subprocess
import sys

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.cli import main
from fxnet_widgets.core.analysis import SerialExecutor, hardware_cost, pareto_front, sweep
from fxnet_widgets.core.images import save_png


@pytest.fixture()
def files(tmp_path):
    rng = np.random.default_rng(5)
    net = fw.Network.from_layers(
        [([[6.0, -5.5, 0.5], [-1.0, 4.5, -4.0], [2.0, 2.5, -6.0]], [0.5, -0.5, 1.0], "sigmoid"),
         ([[5.0, -4.0, 3.0]], [-2.0], "sigmoid")]
    )  # fmt: skip
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, table_bits=14, table_frac=9, out_bits=8)
    net.save(tmp_path / "net.json")
    plan.save(tmp_path / "plan.json")
    img = rng.integers(0, 256, (30, 40, 3), dtype=np.uint8)
    save_png(tmp_path / "img.png", img)
    np.save(tmp_path / "codes.npy", img.reshape(-1, 3).astype(np.int64))
    dec = net.decide(net.predict(img))
    save_png(tmp_path / "mask.png", np.repeat((dec * 255).astype(np.uint8)[..., None], 3, axis=2))
    np.save(tmp_path / "labels.npy", dec.reshape(-1))
    return tmp_path, net, plan, img


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def test_cost_text_and_json(files, capsys):
    d, net, plan, _ = files
    code, out, err = cli(capsys, "cost", d / "net.json", d / "plan.json", "--video", "1280x720p60")
    assert code == 0, err
    assert out.startswith("hardware cost (constant weights as CSD shift-and-add;")
    # CTA-861 VIC 4: 74.25 MHz; margin against the default 200 MHz
    assert out.splitlines()[-1] == (
        "video 1280x720p60 (1650 x 750 total at 60.000 Hz): needs 74.250 MHz at 1 sample(s) per clock; "
        "maximum clock 200.000 MHz, margin x2.694 (keeps up)"
    )
    code, out, err = cli(capsys, "cost", d / "net.json", d / "plan.json", "--json", "--multipliers", "hard",
                         "--video", "3840x2160p60", "--max-clock", "300e6")  # fmt: skip
    assert code == 0, err
    doc = json.loads(out)
    assert doc["cost"] == hardware_cost(net, plan, multipliers="hard").to_dict()
    # 14-bit address, 8-bit output: 131072 bits per table, four tables (common practice)
    assert doc["cost"]["totals"]["table_bits"] == 524288
    assert doc["video"]["needed_clock_hz"] == 594e6 and doc["video"]["ok"] is False


def test_cost_errors(files, capsys):
    d, *_ = files
    code, out, err = cli(capsys, "cost", d / "net.json", d / "plan.json", "--video", "720p")
    assert code == 2 and out == ""
    assert err == "fxnet cost: --video must be one of 640x480p59.94, 640x480p60, 1280x720p60, 1280x720p59.94, " \
        "1920x1080p60, 1920x1080p59.94, 3840x2160p60, 3840x2160p59.94, not '720p'\n"
    code, out, err = cli(capsys, "cost", d / "net.json", d / "plan.json", "--multiplier-size", "18")
    assert code == 2 and err == "fxnet cost: --multiplier-size must be AxB (e.g. 18x18), not '18'\n"
    code, out, err = cli(capsys, "cost", d / "net.json", d / "missing.json")
    assert code == 2 and err == f"fxnet: {d / 'missing.json'}: no such file\n"


def test_sweep_writes_records_and_front(files, capsys):
    d, net, _, img = files
    out_file = d / "sweep.json"
    code, out, err = cli(capsys, "sweep", d / "net.json", d / "img.png", "--grid", "weight_frac=2:4,table_bits=6:8",
                         "-o", out_file, "--labels", d / "mask.png", "--workers", "0")  # fmt: skip
    assert code == 0, err
    assert out.startswith("sweep of 9 plans (0 refused by the kernel); Pareto front by total_bits and mismatch:")
    doc = json.loads(out_file.read_text())
    assert doc["kind"] == "fxnet.sweep" and len(doc["records"]) == 9
    assert doc["grid"] == {"weight_frac": [2, 3, 4], "table_bits": [6, 7, 8]}
    recs = sweep(net, img, doc["grid"], labels=net.decide(net.predict(img)), executor=SerialExecutor())
    assert doc["records"] == [r.to_dict() for r in recs]
    assert doc["pareto"] == [r.index for r in pareto_front(recs)]
    assert all(r["accuracy"] is not None for r in doc["records"])
    code, out, err = cli(capsys, "sweep", d / "net.json", d / "codes.npy", "--grid", "out_bits=4|6", "--layer", "2",
                         "-o", d / "s2.json", "--json")  # fmt: skip
    assert code == 0, err
    assert json.loads(out)["plans"] == 2


def test_sweep_errors(files, capsys):
    d, *_ = files
    code, _, err = cli(capsys, "sweep", d / "net.json", d / "img.png", "--grid", "bits=1:2", "-o", d / "s.json")
    assert code == 2 and err.startswith("fxnet sweep: --grid: grid field must be a plan key (") and err.count("\n") == 1
    code, _, err = cli(capsys, "sweep", d / "net.json", d / "img.png", "--grid", "out_bits=4", "-o", d / "s.txt")
    assert code == 2 and err == f"fxnet: {d / 's.txt'}: the output file name must end in .json\n"
    np.save(d / "short.npy", np.zeros(5, dtype=np.int64))
    code, _, err = cli(capsys, "sweep", d / "net.json", d / "img.png", "--grid", "out_bits=4", "-o", d / "s.json",
                       "--labels", d / "short.npy")  # fmt: skip
    assert code == 2
    assert err == f"fxnet: {d / 'short.npy'}: labels must have shape (1200,) or (30, 40) (one per sample), not (5,)\n"
    save_png(d / "grey.png", np.full((30, 40, 3), 128, np.uint8))
    code, _, err = cli(capsys, "sweep", d / "net.json", d / "img.png", "--grid", "out_bits=4", "-o", d / "s.json",
                       "--labels", d / "grey.png")  # fmt: skip
    assert code == 2
    assert err == (
        f"fxnet: {d / 'grey.png'}: mask pixels must be black (0) or white (255), not (128, 128, 128) at x=0, y=0\n"
    )


def test_tune_writes_a_plan_that_meets_the_budget(files):
    d, net, _, img = files
    # as a user runs it: a real process, exit code and files
    p = subprocess.run(
        [sys.executable, "-m", "fxnet_widgets.cli", "tune", str(d / "net.json"), str(d / "codes.npy"),
         "--max-mismatch", "0.01", "-o", str(d / "tuned.json"), "--workers", "0", "--json"],
        capture_output=True, text=True,
    )  # fmt: skip
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    plan = fw.Plan.load(d / "tuned.json", net)
    r = fw.emulate(net, plan, img)
    assert r.mismatch / r.n <= 0.01 and r.event_totals()["acc_overflow"] == 0
    assert doc["verified"] and doc["local_minimum"] and doc["plan"] == plan.to_dict()


def test_tune_errors(files, capsys):
    d, *_ = files
    code, _, err = cli(capsys, "tune", d / "net.json", d / "img.png", "--max-mismatch", "5", "-o", d / "t.json")
    assert code == 2 and err == "fxnet tune: --max-mismatch must be a fraction between 0 and 1, not '5'\n"
    code, _, err = cli(capsys, "tune", d / "net.json", d / "img.png", "--max-mismatch", "0.1", "-o", d / "t.json",
                       "--cost", "gates")  # fmt: skip
    assert code == 2 and err.startswith("fxnet: --cost must be one of total_bits, ") and err.endswith(", not 'gates'\n")
