"""Table build time: the guarded exact builder (contract step 6) vs plain float64, in one run.

Prints the median build time of
  * every table of the demo plan (assets/network.json + assets/plan.json), and
  * one 20-bit table (sigmoid, floor, saturated tails on both sides),
with the guarded builder and with a plain float64 builder (f(t) in float64, rounded,
clamped: the builder before issue 22), their ratio (target <= 1.5), and how many
entries the guard had to decide (``guarded``) and how many exact decimal evaluations
that took (``exact``: runs of guarded entries are filled by monotonicity).

Run: python benchmarks/bench_tables.py [--repeat 9]
"""

from __future__ import annotations

import argparse
import statistics
import timeit
from pathlib import Path

import numpy as np

import fxnet_widgets as fw
from fxnet_widgets.core import kernel
from fxnet_widgets.core.formats import round_float
from fxnet_widgets.core.kernel import tables as kernel_tables
from fxnet_widgets.core.kernel.tables import TableSpec, build_table, float_activation, table_inputs

ROOT = Path(__file__).resolve().parents[1]


def plain_float64(spec: TableSpec) -> np.ndarray:
    """The float64-only builder: what a table was before the guard."""
    t = table_inputs(1 << spec.table_bits, spec.index_min, spec.table_frac, spec.shift, spec.index_round, spec.sample)
    y = np.ldexp(float_activation(t, spec.activation), spec.out_frac)
    return np.clip(round_float(y, spec.table_round), spec.out_min, spec.out_max).astype(np.int64)


def demo_specs() -> list[TableSpec]:
    net = fw.Network.load(ROOT / "assets" / "network.json")
    plan = fw.Plan.load(ROOT / "assets" / "plan.json", net)
    specs = []
    for L in kernel.build_integer_network(net, plan).layers:
        p = L.plan
        if L.table is not None:
            assert p.table_bits is not None and p.table_frac is not None
            specs += [TableSpec(L.activation, p.table_bits, p.table_frac, L.shift, p.index_round, p.table_sample,
                                L.out_frac, p.table_round, L.out_min, L.out_max)]  # fmt: skip
    return specs


def median_time(fn, repeat: int) -> float:
    return statistics.median(timeit.repeat(fn, number=1, repeat=repeat))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=9)
    args = ap.parse_args()
    cases = {
        "demo plan (one table per layer)": demo_specs(),
        "20-bit sigmoid table, floor": [TableSpec("sigmoid", 20, 14, 4, "floor", "edge", 8, "floor", 0, 255)],
        "20-bit tanh table, mid, trunc": [TableSpec("tanh", 20, 12, 3, "trunc", "mid", 9, "trunc", -512, 511)],
    }
    print("table build, median of", args.repeat, "runs (guarded exact builder vs plain float64)")
    for name, specs in cases.items():
        guarded = exact = entries = 0
        for spec in specs:
            s = kernel_tables.build_table_counted(spec)[1]
            guarded, exact, entries = guarded + s.guarded, exact + s.exact, entries + s.entries
            differ = int(np.count_nonzero(build_table(spec) != plain_float64(spec)))
        t_exact = median_time(lambda specs=specs: [build_table(s) for s in specs], args.repeat)
        t_float = median_time(lambda specs=specs: [plain_float64(s) for s in specs], args.repeat)
        print(f"  {name}: {len(specs)} table(s), {entries} entries")
        print(f"    guarded builder {t_exact * 1e3:8.2f} ms, plain float64 {t_float * 1e3:8.2f} ms, "
              f"ratio {t_exact / t_float:5.2f} (target <= 1.5)")  # fmt: skip
        print(f"    guard: {guarded} entries undecided by float64, {exact} exact evaluations; "
              f"last table: {differ} entries differ from plain float64")  # fmt: skip


if __name__ == "__main__":
    main()
