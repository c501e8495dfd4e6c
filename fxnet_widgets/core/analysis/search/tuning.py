"""``tune``: a local search for the cheapest plan that meets an error budget on the data."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass, replace
from typing import Any, NamedTuple

from ...kernel import emulate
from ...network import Network
from ...plan import Plan
from ...plan import check_field as check_plan_field
from ..cost import HardwareCost, hardware_cost
from ..metrics import ErrorMetrics, error_metrics
from .evaluate import PlanTask, argmax_ties, base_plan, check_cost_key, check_cost_options, evaluate, prepare_data
from .executors import Runner
from .progress import Progress
from .records import SweepRecord
from .refining import Reference, check_refine, compare, refine_record

__all__ = ["TUNE_MOVES", "Move", "TuneStep", "TuneResult", "tune", "move"]

#: the moves of :func:`tune`, each reducing one width by ``bits``
TUNE_MOVES = ("weight_lsb", "weight_msb", "acc_msb", "table_lsb", "table_msb", "out_lsb", "out_msb")
#: the sizes of one move, in bits
STEPS = (1, 2, 4)


class Move(NamedTuple):
    """One candidate of a tune round: ``kind`` on ``layer`` by ``bits``, giving ``plan``."""

    kind: str
    layer: int
    bits: int
    plan: Plan


def move(network: Network, plan: Plan, layer: int, kind: str, bits: int) -> Move | None:
    """``plan`` with one width of ``layer`` reduced by ``bits`` (see :func:`tune`); None if impossible."""
    lp = plan.layers[layer]
    table = network.layers[layer].has_table
    v: dict[str, Any]
    if kind == "weight_lsb":
        v = {"weight_bits": lp.weight_bits - bits, "weight_frac": lp.weight_frac - bits}
    elif kind == "weight_msb":
        v = {"weight_bits": lp.weight_bits - bits}
    elif kind == "acc_msb":
        v = {"acc_bits": lp.acc_bits - bits}
    elif kind == "table_lsb" and table:
        assert lp.table_bits is not None and lp.table_frac is not None
        v = {"table_bits": lp.table_bits - bits, "table_frac": lp.table_frac - bits}
    elif kind == "table_msb" and table:
        assert lp.table_bits is not None
        v = {"table_bits": lp.table_bits - bits}
    elif kind == "out_lsb":
        v = {"out_bits": lp.out_bits - bits}
        if lp.out_frac is not None:
            v["out_frac"] = lp.out_frac - bits
    elif kind == "out_msb" and not table:
        v = {"out_bits": lp.out_bits - bits}
    else:
        return None
    try:
        for k, x in v.items():
            check_plan_field(k, x, "")
    except ValueError:
        return None
    new = Plan(tuple(replace(p, **v) if j == layer else p for j, p in enumerate(plan.layers)))
    return Move(kind, layer, bits, new)


def _width_sum(plan: Plan) -> int:
    return sum(lp.weight_bits + lp.acc_bits + (lp.table_bits or 0) + lp.out_bits for lp in plan.layers)


@dataclass(frozen=True)
class TuneStep:
    """One accepted move of :func:`tune`."""

    move: str
    layer: int
    bits: int
    cost: int
    mismatch: int
    refined: bool = False  # the move met the budget only with refined integers (``tune(refine=...)``)


@dataclass(frozen=True, eq=False)
class TuneResult:
    """Answer of :func:`tune`.

    Attributes
    ----------
    plan : the cheapest plan found that meets the budget
    start : the guaranteed-safe plan it started from (:func:`~fxnet_widgets.core.starting.start_plan`
        on the data unless given)
    max_mismatch : the budget (fraction of decisions that may differ from float)
    steps : the accepted moves, in order
    records : every plan evaluated, in evaluation order
    metrics, cost : verification: a final emulation of ``plan`` on the data, and its cost
    verified : the final emulation meets the budget with no accumulator overflow
    local_minimum : every one-bit move of :data:`TUNE_MOVES` from ``plan`` breaks the budget or is impossible
        (with ``refine``: also after refinement, which must have been tried on each)
    network : the network ``plan`` is for: the refined network when the answer needed refinement
        (weights exactly representable under ``plan``), else the given network
    refinement : the answer's refinement summary (:meth:`Refinement.to_dict`, no timing), or None
    """

    plan: Plan
    start: Plan
    max_mismatch: float
    cost_key: str
    steps: tuple[TuneStep, ...]
    records: tuple[SweepRecord, ...]
    metrics: ErrorMetrics
    cost: HardwareCost
    verified: bool
    local_minimum: bool
    network: Network | None = None
    refinement: dict[str, Any] | None = None

    @property
    def refined(self) -> bool:
        """True when the answer's figures are those of a refined network (:attr:`network`)."""
        return self.refinement is not None

    def summary(self) -> str:
        """A few lines: budget, start and answer cost, the answer's disagreement, its plan."""
        start_rec = self.records[0]
        lines = [
            f"tune: budget {self.max_mismatch:g} of decisions may differ from float, no accumulator overflow",
            f"  start {self.cost_key} {start_rec.cost}, answer {self.cost.value(self.cost_key)} "
            f"after {len(self.steps)} moves, {len(self.records)} plans evaluated",
            f"  answer: {self.metrics.mismatch} of {self.metrics.n} decisions differ "
            f"({100 * self.metrics.mismatch_fraction:.4f} %); verified {'yes' if self.verified else 'NO'}; "
            f"local minimum {'yes' if self.local_minimum else 'no'}",
        ]
        if self.refinement is not None:
            n_ref = sum(1 for s in self.steps if s.refined)
            lines.append(f"  refined integers ({self.refinement['method']}): the answer holds only with the "
                         f"refined network ({n_ref} of the moves needed refinement), compared with the original "
                         "float")  # fmt: skip
        for i, lp in enumerate(self.plan.layers):
            lines.append(f"  layer {i + 1}: {lp!r}")
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields (plans as documents; the evaluated records as their count)."""
        return {
            "plan": self.plan.to_dict(),
            "start": self.start.to_dict(),
            "max_mismatch": self.max_mismatch,
            "cost_key": self.cost_key,
            "steps": [asdict(s) for s in self.steps],
            "evaluated": len(self.records),
            "metrics": self.metrics.to_dict(),
            "cost": self.cost.to_dict(),
            "verified": self.verified,
            "local_minimum": self.local_minimum,
            "refined": self.refined,
            "refinement": self.refinement,
        }


def tune(
    network: Network,
    codes: Any,
    max_mismatch: float = 0.001,
    *,
    labels: Any = None,
    start: Plan | None = None,
    cost: str = "total_bits",
    cost_options: Mapping[str, Any] | None = None,
    executor: Any = None,
    progress: Progress | None = None,
    max_rounds: int = 500,
    refine: bool | str = False,
    refine_options: Mapping[str, Any] | None = None,
) -> TuneResult:
    """The cheapest plan found that meets an error budget on the data.

    A plan is *acceptable* when at most ``max_mismatch`` (a fraction) of its
    decisions differ from float on ``codes`` and no accumulator overflows on
    them. With several outputs, a decision whose top code is shared (an argmax
    tie, decided by the lowest index) counts as differing even when the lowest
    index happens to be float's choice: such agreement is luck of the class order. Starting from ``start`` (default
    :func:`~fxnet_widgets.core.starting.start_plan`, whose accumulators cannot
    overflow), each round evaluates every move of :data:`TUNE_MOVES` on every
    layer by 1, 2 and 4 bits (``weight_lsb``: ``weight_bits`` and ``weight_frac``
    down, the same range with fewer fraction bits; ``weight_msb``:
    ``weight_bits`` down; ``acc_msb``: ``acc_bits`` down; ``table_lsb`` /
    ``table_msb``: ``table_bits`` down with / without ``table_frac``;
    ``out_lsb``: ``out_bits`` (and an explicit ``out_frac``) down; ``out_msb``:
    relu/identity ``out_bits`` down) and takes the acceptable one with the lowest
    cost (ties: fewer total bits, then move order). It stops when no move is
    acceptable.

    Guarantee: the answer is acceptable (checked by a final emulation,
    ``verified``), and reducing any single width of it by one bit in any of these
    ways breaks the budget or is impossible (``local_minimum``). It is a local
    search: a cheaper acceptable plan elsewhere is not ruled out. Deterministic:
    the same answer whatever executor runs it.

    With ``refine="rounding"`` (or True) or ``"both"``, a candidate that misses the
    budget with plain rounding gets a cheap :func:`~fxnet_widgets.core.refine.refine`
    of its integers on the data (a seeded subset of ``samples``; bounded ``steps``
    and ``epochs``; ``refine_options``: ``samples``, ``steps``, ``epochs``,
    ``budget_s``, ``tries``, ``seed``, see :class:`RefineSettings`), and is
    acceptable when the refined network meets the budget with no accumulator
    overflow on all of ``codes``, its decisions compared with the *original*
    network's float decisions. Refinement starts at the plain search's local
    minimum (so the answer is never costlier than without it); from there each
    round refines at most ``tries`` failing candidates cheaper than the best plain
    one, nearest misses first (fewest differing decisions, then cost), and takes
    the cheapest that passes; every candidate is refined from the given network's float
    weights. The answer's :attr:`TuneResult.network` is then the refined network;
    its cost is measured on it. Deterministic unless ``budget_s`` is given.
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if isinstance(max_mismatch, bool) or not isinstance(max_mismatch, (int, float)):
        raise TypeError(f"max_mismatch must be a number, not {max_mismatch!r}")
    if not 0 <= max_mismatch <= 1:
        raise ValueError(f"max_mismatch must be between 0 and 1, not {max_mismatch!r}")
    check_cost_key(cost)
    opts = check_cost_options(cost_options)
    flat, lab = prepare_data(network, codes, labels)
    start = base_plan(network, start, flat, "start")
    settings = check_refine(refine, refine_options)
    ref = Reference(network, flat, settings) if settings is not None else None
    refined_seen: dict[Plan, SweepRecord | None] = {}

    n = max(1, flat.shape[0])

    def acceptable(r: SweepRecord) -> bool:
        strict = r.strict_mismatch
        return r.ok and strict is not None and strict / n <= max_mismatch and not r.events.get("acc_overflow", 0)

    n_moves = len(network.layers) * len(TUNE_MOVES) * len(STEPS)
    records: list[SweepRecord] = []
    seen: dict[Plan, SweepRecord] = {}
    steps: list[TuneStep] = []
    with Runner(executor, n_moves * flat.shape[0] * 4) as runner:

        def run(plans: list[Plan]) -> list[SweepRecord]:
            todo = [p for p in dict.fromkeys(plans) if p not in seen]
            tasks = [PlanTask(len(records) + i, (), p.to_dict(), plan=p) for i, p in enumerate(todo)]
            got = evaluate(runner, network, flat, lab, tasks, cost, opts, progress, chunks_per_worker=1)
            for p, r in zip(todo, got):
                seen[p] = r
            records.extend(got)
            return [seen[p] for p in plans]

        def refined(p: Plan) -> SweepRecord | None:
            if p not in refined_seen:
                assert ref is not None
                got = refine_record(ref, lab, seen[p], len(records), cost, opts)
                refined_seen[p] = got
                if got is not None:
                    records.append(got)
            return refined_seen[p]

        (cur,) = run([start])
        if not acceptable(cur):
            why = (
                cur.error
                if not cur.ok
                else f"{(cur.strict_mismatch or 0) / n:.6g} of decisions differ from float (or agree only "
                f"through a tie) and {cur.events.get('acc_overflow', 0)} accumulator overflows"
            )
            raise ValueError(
                f"the starting plan must meet the budget (max_mismatch {max_mismatch:g}, no accumulator "
                f"overflow), not {why}; give a wider start"
            )
        plan = start
        refining = False  # plain rounds first, to their local minimum; then rounds with refinement
        for _ in range(max_rounds):
            cands = [m for layer in range(len(network.layers)) for kind in TUNE_MOVES for d in STEPS
                     if (m := move(network, plan, layer, kind, d)) is not None]  # fmt: skip
            recs = run([c.plan for c in cands])
            best: tuple[tuple[int, int, int], Move, SweepRecord] | None = None
            for order, (c, r) in enumerate(zip(cands, recs)):
                if acceptable(r):
                    assert r.cost is not None
                    key = (r.cost, _width_sum(c.plan), order)
                    if best is None or key < best[0]:
                        best = (key, c, r)
            if refining:
                assert settings is not None
                failing = sorted(
                    (r.strict_mismatch or 0, r.cost, _width_sum(c.plan), order, c)
                    for order, (c, r) in enumerate(zip(cands, recs))
                    if r.ok and r.cost is not None and not acceptable(r)
                    and (best is None or (r.cost, _width_sum(c.plan), order) < best[0])
                )  # fmt: skip
                for _, _, ws, order, c in failing[: settings.tries]:
                    rr = refined(c.plan)
                    if rr is not None and acceptable(rr):
                        assert rr.cost is not None
                        key = (rr.cost, ws, order)
                        if best is None or key < best[0]:
                            best = (key, c, rr)
            if best is None:
                if settings is None or refining:
                    break
                refining = True
                continue
            _, chosen, cur = best
            plan = chosen.plan
            assert cur.cost is not None and cur.mismatch is not None
            steps.append(TuneStep(chosen.kind, chosen.layer, chosen.bits, cur.cost, cur.mismatch, cur.refined))
    one_bit = [m.plan for layer in range(len(network.layers)) for kind in TUNE_MOVES
               if (m := move(network, plan, layer, kind, 1)) is not None]  # fmt: skip
    local_min = all(p in seen and not acceptable(seen[p]) for p in one_bit)
    if settings is not None:
        local_min = local_min and all(p in refined_seen and ((rp := refined_seen[p]) is None or not acceptable(rp))
                                      for p in one_bit)  # fmt: skip
    answer = network
    if cur.refined_network is not None:
        answer = Network.from_dict(dict(cur.refined_network))
        assert ref is not None
        result = emulate(answer, plan, codes)  # against the ORIGINAL network's float, not the refined one's
        metrics = compare(result, ref.out, ref.decisions, labels)
        _, tied_agreeing = argmax_ties(result.out_codes, result.decisions, ref.decisions)
    else:
        result = emulate(network, plan, codes)
        metrics = error_metrics(result, labels)
        _, tied_agreeing = argmax_ties(result.out_codes, result.decisions, result.float_decisions)
    hw = hardware_cost(answer, plan, **opts)
    verified = (metrics.mismatch + tied_agreeing) / n <= max_mismatch and metrics.events["acc_overflow"] == 0
    return TuneResult(
        plan, start, float(max_mismatch), cost, tuple(steps), tuple(records), metrics, hw, verified, local_min,
        answer, None if cur.refinement is None else dict(cur.refinement),
    )
