"""Resource estimates (LUTs, flip-flops, block RAMs, DSPs) calibrated on real synthesis runs.

The estimate counts from the generated datapath itself (:mod:`.structure`): the live
adder, comparator, multiplexer and table bits after the folding Yosys does, the
register nets, the block RAMs by ``memory_libmap``'s rule and layout, and the DSP
blocks by ``mul2dsp``'s rule. Block RAMs and DSPs are counted, not fitted. LUTs are
a weighted sum of the :data:`~.structure.LUT_FEATURES` and flip-flops a multiple of
the register nets, with non-negative coefficients per target that minimise the sum
of relative errors (least absolute relative deviation: the median error counts, one
odd design does not pull the fit) on a documented, generated set of designs
(:func:`calibration_plans`: the demo network with plans drawn the way ``tune`` and
``sweep`` move, seeded). The coefficients live in ``calibration.json`` beside this
file with the tool version they were fitted with, written by
``python benchmarks/bench_calibration.py --fit N``; the same script prints the errors
on fresh plans. The LUT and flip-flop fit is for products as shift-add (the default
of ``synthesize``); with ``products="multiply"`` only the DSP count is checked.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..fileio import atomic_write_json, load_json
from ..network import Network
from ..plan import LayerPlan, Plan
from .mapping import dsp_count
from .structure import LUT_FEATURES, Structure, structure

__all__ = ["Calibration", "LUT_FEATURES", "fit", "fit_relative", "calibration_plans", "calibrations", "estimate",
           "save_calibrations", "datapath_structure", "CALIBRATION_FILE"]  # fmt: skip

CALIBRATION_FILE = Path(__file__).with_name("calibration.json")


def datapath_structure(network: Network, plan: Plan, target: str, products: str = "shift-add") -> Structure:
    """The :class:`~.structure.Structure` of the datapath ``synthesize`` generates for ``(network, plan)``
    (``pipeline="auto"`` for the default 74.25 MHz clock)."""
    from ..datapath import plan_datapath  # lazily: the datapath imports the analysis, which imports this

    return structure(plan_datapath(network, plan, products=products), target)


def fit_relative(X: np.ndarray, y: np.ndarray, iterations: int = 200) -> np.ndarray:
    """Non-negative ``c`` minimising ``sum |X c - y| / max(y, 1)`` (iteratively reweighted least squares;
    a coefficient that would go negative is fixed at 0)."""
    X, y = np.asarray(X, dtype=np.float64), np.asarray(y, dtype=np.float64)
    s = np.maximum(y, 1.0)
    A, b = X / s[:, None], y / s
    active = [j for j in range(X.shape[1]) if np.any(X[:, j] != 0)]
    w = np.ones(len(y))
    c = np.zeros(X.shape[1])
    for _ in range(iterations):
        while True:
            c = np.zeros(X.shape[1])
            if not active:
                break
            sw = np.sqrt(w)[:, None]
            sol = np.linalg.lstsq(A[:, active] * sw, b * sw[:, 0], rcond=None)[0]
            if sol.min() >= 0:
                c[active] = sol
                break
            active.pop(int(np.argmin(sol)))
        w = 1.0 / np.maximum(np.abs(A @ c - b), 1e-4)
    return c


@dataclass(frozen=True)
class Calibration:
    """Fitted coefficients of one target and where they come from.

    ``luts``: one coefficient per :data:`LUT_FEATURES`; ``ffs``: flip-flops per register net.
    """

    target: str
    tools: dict[str, str]
    designs: str
    n_designs: int
    luts: tuple[float, ...]
    ffs: float

    def estimate(self, network: Network, plan: Plan, products: str = "shift-add") -> dict[str, int]:
        """``{"luts", "ffs", "brams", "dsps"}`` of the datapath of ``(network, plan)`` on this target."""
        return self.estimate_structure(datapath_structure(network, plan, self.target, products))

    def estimate_structure(self, s: Structure) -> dict[str, int]:
        return {
            "luts": max(0, round(float(np.dot(self.luts, s.features())))),
            "ffs": max(0, round(self.ffs * s.reg_bits)),
            "brams": s.brams,
            "dsps": sum(dsp_count(self.target, *p) for p in s.products),
        }

    def to_dict(self) -> dict[str, Any]:
        return {"target": self.target, "tools": self.tools, "designs": self.designs, "n_designs": self.n_designs,
                "fit": "non-negative, least absolute relative error", "lut_features": list(LUT_FEATURES),
                "luts": [round(c, 6) for c in self.luts], "ffs_per_register_bit": round(self.ffs, 6)}  # fmt: skip


def fit(
    target: str, rows: list[tuple[Network, Plan, dict[str, int]]], tools: dict[str, str], designs: str
) -> Calibration:
    """Fit the LUT and flip-flop coefficients of ``target`` over ``rows`` of ``(network, plan, measured counts)``
    (shift-add products; see :func:`fit_relative`)."""
    if len(rows) < 3:
        raise ValueError(f"a calibration must have at least 3 designs, not {len(rows)}")
    S = [datapath_structure(net, plan, target) for net, plan, _ in rows]
    X = np.array([s.features() for s in S])
    luts = fit_relative(X, np.array([m["luts"] for _, _, m in rows]))
    ffs = fit_relative(np.array([[s.reg_bits] for s in S]), np.array([m["ffs"] for _, _, m in rows]))
    return Calibration(target, dict(tools), designs, len(rows), tuple(float(c) for c in luts), float(ffs[0]))


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
        if d.get("lut_features") != list(LUT_FEATURES):
            continue  # fitted for other features: refit with the benchmark
        luts = tuple(float(c) for c in d["luts"])
        out[d["target"]] = Calibration(d["target"], d["tools"], d["designs"], int(d["n_designs"]), luts,
                                       float(d["ffs_per_register_bit"]))  # fmt: skip
    return out


def save_calibrations(cals: dict[str, Calibration], path: str | Path = CALIBRATION_FILE) -> None:
    atomic_write_json(path, {"kind": "fxnet.calibration", "version": 2,
                             "calibrations": [c.to_dict() for _, c in sorted(cals.items())]})  # fmt: skip


def estimate(network: Network, plan: Plan, target: str = "ice40-up5k", products: str = "shift-add") -> dict[str, int]:
    """Calibrated ``{"luts", "ffs", "brams", "dsps"}`` of the datapath of ``(network, plan)`` on ``target``."""
    cals = calibrations()
    if target not in cals:
        raise ValueError(f"target must be one of the calibrated targets ({', '.join(sorted(cals)) or 'none'}), "
                         f"not {target!r}")  # fmt: skip
    return cals[target].estimate(network, plan, products)


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
