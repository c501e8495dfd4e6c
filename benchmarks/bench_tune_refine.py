"""``tune(refine=...)`` on the demo: total bits at a 0.1 % budget with and without refinement.

Same data as part 2 of ``bench_refine.py`` (50,000 training-scene pixels, seeded),
``tune`` run twice in one process: plain, then ``refine="rounding"`` (refinement
from the plain local minimum on a 20,000-pixel subset, judged on all 50,000
against the original float). Prints the ratio of total bits (target <= 0.8), the
disagreement of each answer on the tuning pixels and on the test scene (never
seen), and the time of each run.

Run: ``python benchmarks/bench_tune_refine.py [--method rounding|both] [--pixels N]``.
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

import numpy as np

from fxnet_widgets.core.analysis.search import SerialExecutor, tune
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.network import Network

ASSETS = Path(__file__).resolve().parents[1] / "assets"


def differing(net: Network, answer: Network, plan, codes: np.ndarray) -> int:
    from fxnet_widgets.core.kernel import emulate

    return int(np.count_nonzero(emulate(answer, plan, codes).decisions != net.decide(net.predict(codes))))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--method", default="rounding", choices=("rounding", "both"))
    ap.add_argument("--pixels", type=int, default=50_000)
    args = ap.parse_args()
    net = Network.load(ASSETS / "network.json")
    train = read_image(ASSETS / "scene-train.png").codes.reshape(-1, 3)
    test = read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    codes = train[np.random.default_rng(0).permutation(train.shape[0])[: args.pixels]]
    print(f"load average before: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores (timings scale with it)")
    t0 = time.perf_counter()
    plain = tune(net, codes, 0.001, executor=SerialExecutor())
    t1 = time.perf_counter()
    ref = tune(net, codes, 0.001, executor=SerialExecutor(), refine=args.method)
    t2 = time.perf_counter()
    a, b = plain.cost.total_bits, ref.cost.total_bits
    assert ref.network is not None
    print(f"demo, 0.1 % budget, {codes.shape[0]} tuning pixels: total bits {a} plain ({t1 - t0:.1f} s), {b} with "
          f"refine={args.method} ({t2 - t1:.1f} s, {sum(s.refined for s in ref.steps)} refined moves); "
          f"ratio {b / a:.3f} (target <= 0.8)")
    print(f"differing decisions on the tuning pixels: plain {differing(net, net, plain.plan, codes)}, refined "
          f"{differing(net, ref.network, ref.plan, codes)} (budget {int(0.001 * codes.shape[0])}); verified "
          f"{ref.verified}")
    print(f"test scene ({test.shape[0]} pixels, never seen): plain {differing(net, net, plain.plan, test)}, "
          f"refined {differing(net, ref.network, ref.plan, test)}")


if __name__ == "__main__":
    main()
