"""``fxnet tune --refine`` / ``fxnet sweep --refine``, ``--target`` and ``fxnet tune --synth-check``."""

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from fxtools import missing

import fxnet_widgets as fw
from fxnet_widgets.cli import main
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.synth import CAUTION, synthesize

ASSETS = Path(__file__).resolve().parents[2] / "assets"


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    d = tmp_path_factory.mktemp("tune-refine")
    train = read_image(ASSETS / "scene-train.png").codes.reshape(-1, 3)
    np.save(d / "codes.npy", train[np.random.default_rng(0).choice(train.shape[0], 4000, replace=False)])
    shutil.copy(ASSETS / "network.json", d / "net.json")
    return d, fw.Network.load(d / "net.json"), np.load(d / "codes.npy")


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def test_tune_refine_writes_the_plan_and_its_network(demo, capsys):
    d, net, codes = demo
    code, out, err = cli(capsys, "tune", d / "net.json", d / "codes.npy", "--max-mismatch", "0.001", "-o",
                         d / "plan.json", "--refine", "--workers", "0", "--quiet")  # fmt: skip
    assert code == 0, err
    assert f"wrote {d / 'plan.network.json'}: the refined network this plan is for" in out
    assert sorted(p.name for p in d.iterdir()) == ["codes.npy", "net.json", "plan.json", "plan.network.json"]
    refined = fw.Network.load(d / "plan.network.json")
    plan = fw.Plan.load(d / "plan.json", refined)
    e = fw.emulate(refined, plan, codes)
    original = net.decide(net.predict(codes))  # the budget is against the ORIGINAL network's float decisions
    assert np.count_nonzero(e.decisions != original) <= 0.001 * len(codes)
    assert e.event_totals()["acc_overflow"] == 0
    # with the original network the plan misses the budget: that is why the refined network is written
    assert fw.emulate(net, plan, codes).mismatch > 0.001 * len(codes)


def test_tune_refine_json_and_a_failed_write_leaves_nothing(demo, capsys):
    d, *_ = demo
    (d / "dir.json").mkdir()  # the plan cannot be written over a directory
    code, _, err = cli(capsys, "tune", d / "net.json", d / "codes.npy", "--max-mismatch", "0.001", "-o",
                       d / "dir.json", "--refine", "rounding", "--workers", "0", "--quiet")  # fmt: skip
    assert code == 2 and err.startswith("fxnet: ") and err.count("\n") == 1
    assert not (d / "dir.network.json").exists() and not list(d.glob("*.tmp"))
    code, out, err = cli(capsys, "tune", d / "net.json", d / "codes.npy", "--max-mismatch", "0.001", "-o",
                         d / "j.json", "--refine", "--workers", "0", "--json")  # fmt: skip
    doc = json.loads(out)
    assert code == 0 and doc["refined"] and doc["network_output"] == str(d / "j.network.json")
    assert doc["refinement"]["method"] == "rounding"


def test_sweep_refine_records_the_refined_networks(demo, capsys):
    d, net, codes = demo
    code, out, err = cli(capsys, "sweep", d / "net.json", d / "codes.npy", "--grid", "weight_frac=1|2", "-o",
                         d / "sweep.json", "--refine", "--workers", "0", "--quiet")  # fmt: skip
    assert code == 0, err
    doc = json.loads((d / "sweep.json").read_text())
    assert doc["refine"] == "rounding"
    got = [r for r in doc["records"] if r["refined"]]
    assert got and f"refined (rounding): {len(got)} plans met fewer differences with refined integers" in out
    original = net.decide(net.predict(codes))
    for r in got:
        refined = fw.Network.from_dict(r["refined_network"])
        e = fw.emulate(refined, fw.Plan.from_dict(r["plan"]), codes)
        assert r["mismatch"] == int(np.count_nonzero(e.decisions != original))


def test_target_and_refine_errors_are_one_line(demo, capsys):
    d, *_ = demo
    base = ["tune", d / "net.json", d / "codes.npy", "--max-mismatch", "0.01", "-o", d / "e.json"]
    code, _, err = cli(capsys, *base, "--target", "spartan")
    assert code == 2 and err.startswith("fxnet tune: --target must be one of ice40-up5k, ") and err.endswith(
        ", not 'spartan'\n")  # fmt: skip
    code, _, err = cli(capsys, *base, "--cost", "luts", "--target", "generic")
    assert code == 2 and err == ("fxnet tune: --target must be a calibrated target with --cost luts "
                                 "(ice40-up5k, xilinx-7), not 'generic'\n")  # fmt: skip
    code, _, err = cli(capsys, *base, "--clock", "50")
    assert code == 2 and err == "fxnet tune: --clock needs --synth-check\n"
    code, _, err = cli(capsys, *base, "--refine", "finetune")
    assert code == 2 and err.count("\n") == 1 and "finetune" in err
    code, _, err = cli(capsys, "sweep", d / "net.json", d / "codes.npy", "--grid", "weight_frac=1|2", "-o",
                       d / "s.json", "--target", "spartan")  # fmt: skip
    assert code == 2 and err.startswith("fxnet sweep: --target must be one of ")


@pytest.mark.parametrize("target", ["ice40-up5k", "xilinx-7"])
def test_tune_cost_luts_by_target_and_synth_check(demo, capsys, target):
    for tool in ("yosys", "nextpnr-ice40") if target.startswith("ice40") else ("yosys",):
        if shutil.which(tool) is None:
            missing(f"{tool} is not installed (Debian package {tool})")
    d, net, codes = demo
    out_plan = d / f"luts-{target}.json"
    code, out, err = cli(capsys, "tune", d / "net.json", d / "codes.npy", "--max-mismatch", "0.01", "-o", out_plan,
                         "--cost", "luts", "--target", target, "--synth-check", "--workers", "0", "--json")  # fmt: skip
    assert code == 0, err
    doc = json.loads(out)
    plan = fw.Plan.load(out_plan, net)
    est = fw.hardware_cost(net, plan, target=target).estimated()
    assert doc["cost_key"] == "luts" and doc["synth_check"]["estimate"] == est
    # the measured figures are Yosys' (and nextpnr's): the same run as synthesize() gives (its cache)
    ref = synthesize(net, plan, target=target)
    m = doc["synth_check"]["measured"]
    assert (m["luts"], m["ffs"], m["brams"]) == (ref.luts, ref.ffs, ref.brams) and m["luts"] > 0
    assert (m["fmax_mhz"] is not None) == target.startswith("ice40") and CAUTION in m["caution"]
    code, out, err = cli(capsys, "tune", d / "net.json", d / "codes.npy", "--max-mismatch", "0.01", "-o",
                         out_plan, "--cost", "luts", "--target", target, "--synth-check", "--workers", "0",
                         "--quiet")  # fmt: skip
    assert code == 0, err
    assert f"synthesis check on {target} " in out and f"  LUTs: {ref.luts}, estimate {est['luts']}" in out
    assert CAUTION in out and f"luts: calibrated estimate for {target}: " in out
