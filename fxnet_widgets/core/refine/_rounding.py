"""Choosing each integer weight and bias among its nearby integers, with the data in view.

Plain quantisation rounds every ``w * 2^F`` to nearest on its own. Here each
weight and bias may take any integer of a small set around its scaled float
value (floor and ceil; with ``reach=2`` also one beyond each), and the set of
choices is picked to minimise the disagreements of the integer network on the
given samples: the idea of per-weight adaptive rounding (choose the rounding
direction by the task loss, not by the distance to the float weight), with the
exact integer network itself as the loss instead of a layer-wise proxy.

* up to ``exhaustive_max`` free values (and a bounded amount of work), every
  combination is tried (a depth-first walk that changes one integer per step);
* beyond that, simulated annealing over single-integer changes (seeded), then
  coordinate descent until no single change helps.

The search starts from ``start`` (plain rounding) and only ever keeps a state
at least as good, so the result is never worse on the samples it was given.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ._integer import IntegerPass

__all__ = ["FreeValue", "candidate_values", "search_rounding", "RoundingOutcome"]


@dataclass(frozen=True)
class FreeValue:
    """One integer with more than one candidate: layer, neuron, input (n_in = bias), values."""

    layer: int
    neuron: int
    input: int
    values: tuple[int, ...]


def candidate_values(scaled: np.ndarray, start: np.ndarray, lo: int, hi: int, reach: int) -> list[tuple[int, ...]]:
    """Per element of ``scaled`` (a float ``w * 2^F``), the sorted integers it may take.

    ``reach=1``: floor and ceil; ``reach=2``: floor - 1 .. ceil + 1; always the
    ``start`` integer too, all inside ``[lo, hi]``.
    """
    out: list[tuple[int, ...]] = []
    for x, s in zip(np.ravel(scaled).tolist(), np.ravel(start).tolist()):
        if math.isfinite(x):
            f, c = math.floor(x), math.ceil(x)
        else:
            f = c = int(s)
        vals = {int(s)}
        vals.update(range(f - (reach - 1), c + reach))
        out.append(tuple(sorted(v for v in vals if lo <= v <= hi)))
    return out


@dataclass
class RoundingOutcome:
    q_w: list[np.ndarray]
    q_b: list[np.ndarray]
    errors: int
    start_errors: int
    method: str
    evaluations: int
    complete: bool


class _Clock:
    def __init__(self, deadline: float | None, stop: Callable[[], bool] | None) -> None:
        self.deadline, self.stop = deadline, stop
        self.count = 0

    def out(self) -> bool:
        self.count += 1
        if self.count % 16:
            return False
        if self.deadline is not None and time.monotonic() >= self.deadline:
            return True
        return bool(self.stop is not None and self.stop())


def search_rounding(
    ip: IntegerPass,
    free: list[FreeValue],
    *,
    seed: int,
    exhaustive_max: int,
    exhaustive_work: int,
    steps: int | None,
    deadline: float | None = None,
    stop: Callable[[], bool] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> RoundingOutcome:
    """Search the integer choices of ``free`` on ``ip`` (which holds the start state)."""
    clock = _Clock(deadline, stop)
    start_energy, start_errors = ip.energy()
    combos = math.prod(len(f.values) for f in free)
    if not free:
        return RoundingOutcome(ip.q_w, ip.q_b, start_errors, start_errors, "none (no free values)", 1, True)
    if len(free) <= exhaustive_max and combos * ip.samples.distinct <= exhaustive_work:
        return _exhaustive(ip, free, combos, start_energy, start_errors, clock, progress)
    return _anneal(ip, free, seed, steps, start_energy, start_errors, clock, progress)


def _current(ip: IntegerPass, f: FreeValue) -> int:
    return int(ip.q_b[f.layer][f.neuron] if f.input == ip.q_w[f.layer].shape[1] else ip.q_w[f.layer][f.neuron, f.input])


def _snapshot(ip: IntegerPass) -> tuple[list[np.ndarray], list[np.ndarray]]:
    return [a.copy() for a in ip.q_w], [a.copy() for a in ip.q_b]


def _restore(ip: IntegerPass, free: list[FreeValue], state: list[int]) -> None:
    for f, v in zip(free, state):
        ip.set(f.layer, f.neuron, f.input, v)


def _exhaustive(ip: IntegerPass, free: list[FreeValue], combos: int, start_energy: float, start_errors: int,
                clock: _Clock, progress: Callable[[int, int], None] | None) -> RoundingOutcome:
    # later layers vary fastest: a change there recomputes the least
    order = sorted(free, key=lambda f: (f.layer, f.neuron, f.input))
    best_energy = start_energy
    best = [_current(ip, f) for f in order]
    done = 0
    complete = True

    def walk(k: int) -> bool:
        nonlocal best_energy, best, done
        if k == len(order):
            e, _ = ip.energy()
            done += 1
            if e < best_energy:
                best_energy, best = e, [_current(ip, f) for f in order]
            if progress is not None and done % 256 == 0:
                progress(done, combos)
            return not clock.out()
        f = order[k]
        for v in f.values:
            ip.set(f.layer, f.neuron, f.input, v)
            if not walk(k + 1):
                return False
        return True

    complete = walk(0)
    _restore(ip, order, best)
    q_w, q_b = _snapshot(ip)
    errors = ip.errors()
    if progress is not None:
        progress(combos, combos)
    how = f"exhaustive ({combos} combinations of {len(free)} free values)"
    if not complete:
        how += f", stopped after {done}"
    return RoundingOutcome(q_w, q_b, errors, start_errors, how, done, complete)


def _anneal(ip: IntegerPass, free: list[FreeValue], seed: int, steps: int | None, start_energy: float,
            start_errors: int, clock: _Clock, progress: Callable[[int, int], None] | None) -> RoundingOutcome:
    rng = np.random.default_rng(seed)
    n_steps = 200 * len(free) if steps is None else steps
    state = [_current(ip, f) for f in free]
    energy = start_energy
    best_energy, best = energy, list(state)
    t0 = max(1.0, 0.02 * start_errors)
    t_end = 0.05
    evaluations = 0
    complete = True
    total = n_steps + len(free)
    for step in range(n_steps):
        if clock.out():
            complete = False
            break
        temp = t0 * (t_end / t0) ** (step / max(1, n_steps - 1))
        k = int(rng.integers(len(free)))
        f = free[k]
        others = [v for v in f.values if v != state[k]]
        v = others[int(rng.integers(len(others)))]
        ip.set(f.layer, f.neuron, f.input, v)
        e, _ = ip.energy()
        evaluations += 1
        if e <= energy or rng.random() < math.exp(-(e - energy) / temp):
            state[k], energy = v, e
            if e < best_energy:
                best_energy, best = e, list(state)
        else:
            ip.set(f.layer, f.neuron, f.input, state[k])
        if progress is not None and step % 64 == 0:
            progress(step, total)
    _restore(ip, free, best)
    energy = best_energy
    state = list(best)
    # coordinate descent: single changes until none helps
    improved = complete
    sweeps = 0
    while improved:
        improved = False
        sweeps += 1
        for k in rng.permutation(len(free)).tolist():
            f = free[k]
            for v in f.values:
                if v == state[k]:
                    continue
                ip.set(f.layer, f.neuron, f.input, v)
                e, _ = ip.energy()
                evaluations += 1
                if e < energy:
                    state[k], energy, improved = v, e, True
                else:
                    ip.set(f.layer, f.neuron, f.input, state[k])
            if clock.out():
                complete = improved = False
                break
    if progress is not None:
        progress(total, total)
    q_w, q_b = _snapshot(ip)
    errors = ip.errors()
    how = f"annealing ({n_steps} steps) and coordinate descent ({sweeps} sweeps) over {len(free)} free values"
    if not complete:
        how += ", stopped early (budget or stop)"
    return RoundingOutcome(q_w, q_b, errors, start_errors, how, evaluations, complete)
