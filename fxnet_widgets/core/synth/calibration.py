"""Resource estimates (LUTs, flip-flops, block RAMs) calibrated on real synthesis runs.

The analytic cost (:func:`~fxnet_widgets.core.analysis.cost.hardware_cost`) counts
adder bits, register bits and table bits. A :class:`Calibration` estimates the LUTs
and flip-flops Yosys reports for the reference datapath on one target as one
feature times a ratio, both fitted on a documented set of generated designs
(:func:`calibration_plans`: the demo network with plans drawn at random, seeded):
the ratio is the median of measured / feature (robust to the designs whose logic
the tools fold away), the feature the one with the lowest leave-one-out median
error. (A least-squares fit on all features was tried first: it over-fitted the
designs and was far worse on fresh plans.) Block RAMs are counted by the device's
block shapes. The fitted coefficients live
in ``calibration.json`` beside this file, written by
``python benchmarks/bench_calibration.py --fit``, with the tool version they were
fitted with; the same script prints the error on fresh plans.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..fileio import atomic_write_json, load_json
from ..kernel import build_integer_network
from ..network import Network
from ..plan import LayerPlan, Plan

__all__ = ["Calibration", "FEATURES", "CANDIDATES", "features", "block_rams", "fit", "calibration_plans",
           "calibrations", "estimate", "CALIBRATION_FILE", "BLOCK_SHAPES"]  # fmt: skip

CALIBRATION_FILE = Path(__file__).with_name("calibration.json")
#: the least-squares features of every estimate, in order
FEATURES = ("adder_bits", "acc_bits", "out_bits", "lut_table_bits", "register_bits")
#: the features an estimate may be proportional to (each grows with the plan's widths)
CANDIDATES = ("adder_bits", "acc_bits", "out_bits", "register_bits")
#: (depth, width) configurations of one block RAM. iCE40 SB_RAM40_4K: 256x16, 512x8, 1024x4,
#: 2048x2 (Lattice "Memory Usage Guide for iCE40 Devices", TN1250; from memory). Xilinx 7 RAMB18:
#: 16384x1 ... 512x36 (7 Series FPGAs Memory Resources, UG473; from memory). ECP5 DP16KD: 16384x1
#: ... 512x36 (ECP5 Memory Usage Guide, TN1264; from memory).
_X18 = ((16384, 1), (8192, 2), (4096, 4), (2048, 9), (1024, 18), (512, 36))
BLOCK_SHAPES: dict[str, tuple[tuple[int, int], ...]] = {
    "ice40": ((256, 16), (512, 8), (1024, 4), (2048, 2)),
    "xilinx-7": _X18,
    "ecp5-25k": _X18,
}


def _shapes(target: str) -> tuple[tuple[int, int], ...]:
    return BLOCK_SHAPES["ice40" if target.startswith("ice40") else target] if target != "generic" else ()


def _blocks(entries: int, width: int, shapes: tuple[tuple[int, int], ...]) -> int:
    return min(math.ceil(entries / d) * math.ceil(width / w) for d, w in shapes) if shapes else 0


def _tables(cost: Any) -> list[tuple[int, int]]:
    """``(entries, width)`` of every activation table (one per sigmoid/tanh neuron) of a ``HardwareCost``."""
    return [(L.table_entries, L.table_width) for L in cost.layers for _ in range(L.tables)]


def _cost(network: Network, plan: Plan) -> Any:
    from ..analysis.cost import hardware_cost  # the analytic model (it imports this module lazily)

    return hardware_cost(network, plan)


def features(cost: Any, target: str, min_bram_bits: int) -> np.ndarray:
    """The :data:`FEATURES` of a ``HardwareCost``: tables of fewer than ``min_bram_bits`` bits count as logic."""
    small = sum(e * w for e, w in _tables(cost) if e * w < min_bram_bits or not _shapes(target))
    acc = sum(L.n_out * L.acc_bits for L in cost.layers)
    out = sum(L.n_out * L.table_width if L.tables else L.n_out * L.acc_bits for L in cost.layers)
    return np.array([cost.adder_bits, acc, out, small, cost.register_bits], dtype=np.float64)


def block_rams(cost: Any, target: str, min_bram_bits: int) -> int:
    """Block RAMs of the tables of at least ``min_bram_bits`` bits, each in its cheapest block shape."""
    shapes = _shapes(target)
    return sum(_blocks(e, w, shapes) for e, w in _tables(cost) if e * w >= min_bram_bits)


@dataclass(frozen=True)
class Calibration:
    """Fitted coefficients of one target (``luts``, ``ffs`` per :data:`FEATURES`) and where they come from."""

    target: str
    tools: dict[str, str]
    designs: str
    n_designs: int
    min_bram_bits: int
    luts: tuple[str, float]  # (feature, ratio)
    ffs: tuple[str, float]

    def estimate(self, network: Network, plan: Plan) -> dict[str, int]:
        """``{"luts", "ffs", "brams"}`` of ``(network, plan)`` on this target."""
        return self.estimate_cost(_cost(network, plan))

    def estimate_cost(self, cost: Any) -> dict[str, int]:
        """``{"luts", "ffs", "brams"}`` from the analytic ``HardwareCost`` of a plan."""
        f = dict(zip(FEATURES, features(cost, self.target, self.min_bram_bits).tolist()))
        return {
            "luts": max(0, round(self.luts[1] * f[self.luts[0]])),
            "ffs": max(0, round(self.ffs[1] * f[self.ffs[0]])),
            "brams": block_rams(cost, self.target, self.min_bram_bits),
        }

    def to_dict(self) -> dict[str, Any]:
        return {"target": self.target, "tools": self.tools, "designs": self.designs, "n_designs": self.n_designs,
                "min_bram_bits": self.min_bram_bits, "features": list(FEATURES),
                "luts": {"feature": self.luts[0], "ratio": self.luts[1]},
                "ffs": {"feature": self.ffs[0], "ratio": self.ffs[1]}}  # fmt: skip


def _ratio_fit(x: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """``(ratio, leave-one-out median relative error)`` of ``y ~ ratio * x`` (ratio: median of y / x)."""
    ok = x > 0
    if ok.sum() < 2:
        return 0.0, float("inf")
    ratio = float(np.median(y[ok] / x[ok]))
    loo = []
    for i in range(len(y)):
        keep = ok.copy()
        keep[i] = False
        r = float(np.median(y[keep] / x[keep])) if keep.any() else ratio
        loo.append(abs(round(r * x[i]) - y[i]) / max(y[i], 1.0))
    return ratio, float(np.median(loo))


def fit(
    target: str, rows: list[tuple[Network, Plan, dict[str, int]]], tools: dict[str, str], designs: str
) -> Calibration:
    """Fit LUTs and flip-flops over ``rows`` of ``(network, plan, measured counts)``.

    Per key, every :data:`CANDIDATES` feature gets the median ratio measured / feature;
    the feature with the lowest leave-one-out median relative error wins. The block-RAM
    threshold is the table size that leaves the fewest block-RAM mismatches (the smallest
    of equals).
    """
    if len(rows) < 3:
        raise ValueError(f"a calibration must have at least 3 designs, not {len(rows)}")
    costs = [(_cost(net, plan), m) for net, plan, m in rows]
    sizes = sorted({e * w for c, _ in costs for e, w in _tables(c)}) + [2**62]

    def misses(t: int) -> int:
        return sum(block_rams(c, target, t) != m["brams"] for c, m in costs)

    threshold = min(sizes, key=lambda t: (misses(t), t)) if _shapes(target) else 2**62
    X = np.array([features(c, target, threshold) for c, _ in costs])
    chosen: dict[str, tuple[str, float]] = {}
    for key in ("luts", "ffs"):
        y = np.array([m[key] for _, m in costs], dtype=np.float64)
        best = min(CANDIDATES, key=lambda f: _ratio_fit(X[:, FEATURES.index(f)], y)[1])
        chosen[key] = (best, _ratio_fit(X[:, FEATURES.index(best)], y)[0])
    return Calibration(target, dict(tools), designs, len(rows), threshold, chosen["luts"], chosen["ffs"])


_loaded: dict[tuple[str, int, int], dict[str, Calibration]] = {}


def calibrations(path: str | Path = CALIBRATION_FILE) -> dict[str, Calibration]:
    """The fitted calibrations by target (empty when none was fitted); read once per file version."""
    p = Path(path)
    if not p.exists():
        return {}
    st = p.stat()
    key = (str(p), st.st_mtime_ns, st.st_size)
    if key not in _loaded:
        _loaded.clear()
        _loaded[key] = _read(p)
    return dict(_loaded[key])


def _read(path: Path) -> dict[str, Calibration]:
    doc = load_json(path)
    out = {}
    for d in doc.get("calibrations", []):
        if d.get("features") != list(FEATURES):
            continue  # fitted for other features: refit with the benchmark
        out[d["target"]] = Calibration(
            d["target"], d["tools"], d["designs"], int(d["n_designs"]), int(d["min_bram_bits"]),
            (str(d["luts"]["feature"]), float(d["luts"]["ratio"])),
            (str(d["ffs"]["feature"]), float(d["ffs"]["ratio"])),
        )  # fmt: skip
    return out


def save_calibrations(cals: dict[str, Calibration], path: str | Path = CALIBRATION_FILE) -> None:
    atomic_write_json(path, {"kind": "fxnet.calibration", "version": 1,
                             "calibrations": [c.to_dict() for _, c in sorted(cals.items())]})  # fmt: skip


def estimate(network: Network, plan: Plan, target: str = "ice40-up5k") -> dict[str, int]:
    """Calibrated ``{"luts", "ffs", "brams"}`` of the reference datapath of ``(network, plan)`` on ``target``."""
    cals = calibrations()
    if target not in cals:
        raise ValueError(f"target must be one of the calibrated targets ({', '.join(sorted(cals)) or 'none'}), "
                         f"not {target!r}")  # fmt: skip
    return cals[target].estimate(network, plan)


def calibration_plans(network: Network, n: int, seed: int) -> list[Plan]:
    """``n`` plans of ``network`` drawn at random (seeded): the generated calibration set.

    Drawn as ``tune`` and ``sweep`` see plans: from ``start_plan`` (the start of
    ``tune``: 16-bit weights, 14-bit tables, 12-bit outputs, safe accumulators), 0-24
    random ``tune`` moves (kind, layer and 1, 2 or 4 bits drawn uniformly; a move the
    plan's limits refuse is drawn again), then, per plan, the accumulator overflow
    (wrap or saturate) and the index rounding (floor or half-even) drawn as a sweep
    grid varies them. No plan is dropped, however small the tools fold it.
    """
    from ..analysis.search.tuning import STEPS, TUNE_MOVES, move
    from ..starting import start_plan

    rng = np.random.default_rng(seed)
    base = start_plan(network)
    plans = []
    for _ in range(n):
        plan = base
        for _ in range(int(rng.integers(0, 25))):
            for _ in range(100):
                m = move(network, plan, int(rng.integers(len(network.layers))), str(rng.choice(TUNE_MOVES)),
                         int(rng.choice(STEPS)))  # fmt: skip
                if m is not None:
                    plan = m.plan
                    break
        overflow, index_round = str(rng.choice(["wrap", "saturate"])), str(rng.choice(["floor", "half-even"]))
        docs = [dict(lp.to_dict(), acc_overflow=overflow) for lp in plan.layers]
        for d, L in zip(docs, network.layers):
            if L.has_table:
                d["index_round"] = index_round
        plans.append(Plan(tuple(LayerPlan.from_dict(d) for d in docs)))
    return plans
