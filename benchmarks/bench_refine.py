"""Refinement: disagreement recovered at the same widths, bits saved at a budget, and time.

Three parts, every figure measured with ``emulate`` in this run:

1. The demo network at a few narrow plans: disagreement with the float network before
   (plain rounding) and after ``refine`` on 20,000 training-scene pixels (a quarter
   held out), on the held-out quarter and on the test scene (other lighting), with
   the time of each method. Targets: rounding <= 5 s, fine-tuning <= 30 s.
2. The demo at a 0.1 % budget: ``tune`` without refinement, then the same one-bit
   moves continued while the *refined* network still meets the budget on all
   50,000 tuning pixels (30,000 of them never seen by ``refine``). Target: total
   bits with refinement <= 0.8 x without.
3. ``--networks N`` (default 20) random 3-3-1 networks trained on our own generated
   scenes, at a fixed narrow plan: median reduction of held-out disagreement, and
   the number of cases worse on the refined samples (target: 0).

Run: ``python benchmarks/bench_refine.py [--networks N] [--parts 1,2,3]``.
"""

from __future__ import annotations

import argparse
import itertools
import os
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

from fxnet_widgets.core.analysis.cost import hardware_cost
from fxnet_widgets.core.analysis.search import SerialExecutor, tune
from fxnet_widgets.core.demo import suggest_plan
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.labels import labels_from_mask
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.core.refine import refine
from fxnet_widgets.core.scenes import make_scene
from fxnet_widgets.core.training import train

ASSETS = Path(__file__).resolve().parents[1] / "assets"


def disagreement(net: Network, refined: Network, plan: Plan, codes: np.ndarray) -> int:
    """Decisions of ``refined`` under ``plan`` that differ from the *original* float network."""
    float_dec = emulate(net, plan, codes).float_decisions
    return int(np.count_nonzero(emulate(refined, plan, codes).decisions != float_dec))


def narrow(plan: Plan, w1: int, f1: int, w2: int, f2: int) -> Plan:
    return plan.replace(layer=0, weight_bits=w1, weight_frac=f1).replace(layer=1, weight_bits=w2, weight_frac=f2)


def part_demo(net: Network, plan: Plan, scene: np.ndarray, test: np.ndarray) -> None:
    print("1. demo network, 20,000 samples (15,000 refined on, 5,000 held out): training-scene pixels, or "
          f"codes drawn uniformly from the RGB cube; test scene {test.shape[0]} pixels (never seen)")
    cube = np.random.default_rng(1).integers(0, 256, (20_000, 3))
    print(f"   {'plan (layer-1 / layer-2 weights)':33s} {'data':6s} {'method':9s} {'refined-on':>17s} "
          f"{'held out':>15s} "
          f"{'test scene':>15s} {'wall':>7s} {'cpu':>7s} {'load':>5s}")
    for w1, f1, w2, f2 in ((6, 1, 5, 2), (5, 0, 4, 1), (5, 1, 4, 1)):
        p = narrow(plan, w1, f1, w2, f2)
        plain = disagreement(net, net, p, test)
        for data, method in itertools.product(("scene", "cube"), ("rounding", "finetune", "both")):
            sample = scene if data == "scene" else cube
            t0, c0 = time.perf_counter(), time.process_time()
            r = refine(net, p, sample, method=method)
            dt, dc = time.perf_counter() - t0, time.process_time() - c0
            after = disagreement(net, r.network, p, test)
            b, a = r.before, r.after
            print(f"   Q{w1 - f1 - 1}.{f1} ({w1} b) / Q{w2 - f2 - 1}.{f2} ({w2} b){'':4s} {data:6s} {method:9s} "
                  f"{b.errors:6d} -> {a.errors:6d}  {b.holdout_errors:5d} -> {a.holdout_errors:5d}  "
                  f"{plain:5d} -> {after:5d}  {dt:5.2f} s {dc:5.2f} s {os.getloadavg()[0]:5.2f}")
    print("   targets: rounding <= 5 s, fine-tuning <= 30 s on 20,000 pixels (wall; cpu = this process's CPU time)")


_MOVES = ("weight_lsb", "weight_msb", "acc_msb", "table_lsb", "table_msb", "out_lsb")


def _moved(plan: Plan, layer: int, move: str) -> Plan | None:
    lp = plan.layers[layer]
    assert lp.table_bits is not None and lp.table_frac is not None
    v = {"weight_lsb": {"weight_bits": lp.weight_bits - 1, "weight_frac": lp.weight_frac - 1},
         "weight_msb": {"weight_bits": lp.weight_bits - 1},
         "acc_msb": {"acc_bits": lp.acc_bits - 1},
         "table_lsb": {"table_bits": lp.table_bits - 1, "table_frac": lp.table_frac - 1},
         "table_msb": {"table_bits": lp.table_bits - 1},
         "out_lsb": {"out_bits": lp.out_bits - 1}}[move]
    if min(v.values()) < 1:
        return None
    return Plan(tuple(replace(q, **v) if j == layer else q for j, q in enumerate(plan.layers)))


def part_tune(net: Network, codes: np.ndarray, test: np.ndarray, budget: float = 0.001) -> None:
    print(f"2. demo at a {100 * budget:g} % budget, tuned on {codes.shape[0]} training-scene pixels")
    t0 = time.perf_counter()
    res = tune(net, codes, budget, executor=SerialExecutor())
    t_tune = time.perf_counter() - t0
    base = res.plan
    bits_plain = hardware_cost(net, base).value("total_bits")
    sample = codes[:20_000]
    limit = int(budget * codes.shape[0])

    def ok(p: Plan, method: str) -> Network | None:
        r = refine(net, p, sample, method=method, steps=1000, epochs=150, holdout_fraction=0.25)
        e = emulate(r.network, p, codes)
        if e.event_totals()["acc_overflow"]:
            return None
        return r.network if disagreement(net, r.network, p, codes) <= limit else None

    t0 = time.perf_counter()
    plan, refined, tried = base, net, 0
    while True:
        best = None
        for layer in range(len(plan.layers)):
            for move in _MOVES:
                p = _moved(plan, layer, move)
                if p is None:
                    continue
                tried += 1
                got = ok(p, "rounding") or ok(p, "both")
                if got is not None:
                    cost = hardware_cost(net, p).value("total_bits")
                    if best is None or cost < best[0]:
                        best = (cost, p, got)
        if best is None:
            break
        _, plan, refined = best
    t_ref = time.perf_counter() - t0
    bits_ref = hardware_cost(net, plan).value("total_bits")
    print(f"   tune alone: total bits {bits_plain} ({t_tune:.1f} s); continued with refinement: total bits "
          f"{bits_ref} ({tried} plans refined, {t_ref:.1f} s); ratio {bits_ref / bits_plain:.3f} (target <= 0.8)")
    n = codes.shape[0]
    print(f"   disagreement on the {n} tuning pixels: tuned {disagreement(net, net, base, codes)}, "
          f"refined {disagreement(net, refined, plan, codes)} (budget {limit})")
    print(f"   test scene ({test.shape[0]} pixels, other lighting, never seen): tuned "
          f"{disagreement(net, net, base, test)}, refined {disagreement(net, refined, plan, test)}")
    for name, pl in (("tuned", base), ("refined", plan)):
        for i, lp in enumerate(pl.layers):
            print(f"   {name} plan layer {i + 1}: {lp!r}")


def part_random(n_networks: int) -> None:
    print(f"3. {n_networks} random 3-3-1 networks, each trained on its own generated scene "
          "(seeded), at 5-bit weights (refine: both, on 12,000 of the scene's pixels)")
    reductions, worse, worse_rest, rows = [], 0, 0, []
    seed = -1
    while len(rows) < n_networks:
        seed += 1
        scene = make_scene(100 + seed, "train")
        if np.count_nonzero(scene.mask == 255) < 100:  # a belt with (almost) no ripe fruit: nothing to learn
            continue
        pixels = labels_from_mask(scene.image, scene.mask, classes=("other", "ripe"))
        net = train(pixels, seed=seed, n_samples=6000, hidden=3).network
        plan = suggest_plan(net, weight_bits=5, table_bits=10, out_bits=6)
        codes = scene.image.reshape(-1, 3)
        order = np.random.default_rng(seed).permutation(codes.shape[0])
        sample, rest = codes[order[:12_000]], codes[order[12_000:]]
        r = refine(net, plan, sample, method="both", seed=seed)
        worse += r.after.errors > r.before.errors
        # the rest of the scene: never seen by refine (its own held-out quarter steers the early stop)
        hb, ha = disagreement(net, net, plan, rest), disagreement(net, r.network, plan, rest)
        worse_rest += ha > hb
        reductions.append((hb - ha) / hb if hb else 0.0)
        rows.append(f"{hb}->{ha}")
    print("   disagreement on the rest of each scene (218,400 pixels never seen), plain -> refined: "
          f"{', '.join(rows)}")
    print(f"   median reduction there {100 * float(np.median(reductions)):.1f} %; worse there: {worse_rest}; "
          f"worse on the refined samples: {worse} of {n_networks} (target 0)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--networks", type=int, default=20)
    ap.add_argument("--parts", default="1,2,3", help="which parts to run (comma-separated numbers)")
    args = ap.parse_args()
    net = Network.load(ASSETS / "network.json")
    plan = Plan.load(ASSETS / "plan.json", net)
    train_px = read_image(ASSETS / "scene-train.png").codes.reshape(-1, 3)
    test = read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    rng = np.random.default_rng(0)
    pick = rng.permutation(train_px.shape[0])
    parts = set(args.parts.split(","))
    print(f"load average before: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores (timings scale with it)")
    if "1" in parts:
        part_demo(net, plan, train_px[pick[:20_000]], test)
    if "2" in parts:
        part_tune(net, train_px[pick[:50_000]], test)
    if "3" in parts and args.networks:
        part_random(args.networks)


if __name__ == "__main__":
    main()
