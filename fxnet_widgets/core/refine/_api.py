"""``refine``: better integers for the same plan, and the :class:`Refinement` it returns."""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..kernel import IntegerNetwork, build_integer_network, emulate
from ..network import Network, as_codes
from ..plan import Plan
from ._finetune import Objective, finetune, logit_offset
from ._integer import IntegerPass, Samples
from ._rounding import FreeValue, candidate_values, search_rounding

__all__ = ["METHODS", "TARGETS", "Figures", "Refinement", "refine"]

METHODS = ("rounding", "finetune", "both")
TARGETS = ("float", "labels")
#: share of ``budget_s`` that fine-tuning gets with ``method="both"`` (rounding gets the rest)
FINETUNE_SHARE = 0.7
#: progress units reported per call of ``refine`` (``progress(done, PROGRESS_TOTAL)``)
PROGRESS_TOTAL = 1000


@dataclass(frozen=True)
class Figures:
    """Disagreements of one integer network, measured with :func:`~fxnet_widgets.core.kernel.emulate`.

    ``errors`` of ``samples`` given samples (the ones refined on), and
    ``holdout_errors`` of ``holdout_samples`` held-out samples (None without).
    An error is a decision that differs from the target (float decision or label).
    """

    errors: int
    samples: int
    holdout_errors: int | None
    holdout_samples: int

    @property
    def fraction(self) -> float:
        return self.errors / self.samples if self.samples else 0.0

    @property
    def holdout_fraction(self) -> float | None:
        if self.holdout_errors is None or not self.holdout_samples:
            return None
        return self.holdout_errors / self.holdout_samples

    def to_dict(self) -> dict[str, Any]:
        return {"errors": self.errors, "samples": self.samples, "fraction": self.fraction,
                "holdout_errors": self.holdout_errors, "holdout_samples": self.holdout_samples,
                "holdout_fraction": self.holdout_fraction}

    def text(self) -> str:
        s = f"{self.errors} of {self.samples} ({100 * self.fraction:.3f} %)"
        hf = self.holdout_fraction
        if hf is not None:
            s += f", held out {self.holdout_errors} of {self.holdout_samples} ({100 * hf:.3f} %)"
        return s


@dataclass(frozen=True, eq=False)
class Refinement:
    """Result of :func:`refine`.

    Attributes
    ----------
    network : Network
        Weights and biases exactly ``q / 2**weight_frac`` and ``q / 2**(in_frac + weight_frac)``,
        so ``plan`` reproduces the chosen integers with no rounding at all.
    plan : Plan
        The plan (unchanged).
    before, after : Figures
        Plain rounding of the given network, and the refined network.
    improved : bool
        False when no gain was found: ``network`` then holds plain rounding's integers.
    """

    network: Network
    plan: Plan
    before: Figures
    after: Figures
    target: str
    method: str
    improved: bool
    seconds: float
    steps: tuple[str, ...]
    notes: tuple[str, ...] = field(default=())

    def summary(self) -> str:
        """Deterministic text (no timing) for notebooks and the command line."""
        what = "float decisions" if self.target == "float" else "labels"
        lines = [
            f"refine ({self.method}, against the {what}):",
            f"  before (plain rounding): {self.before.text()}",
            f"  after (refined):         {self.after.text()}",
        ]
        lines += [f"  {s}" for s in self.steps]
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        return {"target": self.target, "method": self.method, "improved": self.improved,
                "before": self.before.to_dict(), "after": self.after.to_dict(),
                "seconds": self.seconds, "steps": list(self.steps), "notes": list(self.notes)}


def _choice(name: str, value: Any, allowed: tuple[str, ...]) -> str:
    if not isinstance(value, str) or value not in allowed:
        raise ValueError(f"{name} must be one of {', '.join(allowed)}, not {value!r}")
    return value


def _count(name: str, value: Any, lo: int) -> int:
    if not isinstance(value, int) or isinstance(value, bool) or value < lo:
        raise ValueError(f"{name} must be an integer of at least {lo}, not {value!r}")
    return value


def _labels(labels: Any, n: int, n_classes: int, what: str) -> np.ndarray:
    y = np.asarray(labels)
    if y.dtype.kind not in "iu" or y.dtype == np.bool_:
        raise TypeError(f"{what} must be integer class indices, not {y.dtype}")
    y = y.reshape(-1)
    if y.shape[0] != n:
        raise ValueError(f"{what} must hold one class per sample ({n}), not {y.shape[0]}")
    if n and (int(y.min()) < 0 or int(y.max()) >= n_classes):
        raise ValueError(f"{what} must be between 0 and {n_classes - 1}, not {int(y.min())}..{int(y.max())}")
    return y.astype(np.int64)


def working_network(net: Network) -> tuple[Network, list[str]]:
    """``net`` with input scale ``pow2``: a ``full`` scale is folded into layer 1 as the kernel folds it."""
    if net.input_scale == "pow2":
        return net, []
    n = 1 << net.input_bits
    first = net.layers[0]
    layers: list[Any] = [(first.weights * (n / (n - 1)), first.bias, first.activation), *net.layers[1:]]
    work = Network.from_layers(layers, input_names=net.input_names, input_bits=net.input_bits,
                               input_scale="pow2", classes=net.classes, threshold=net.threshold)
    return work, [f"input scale 'full' folded into layer 1 (x 2^{net.input_bits}/(2^{net.input_bits}-1)); "
                  "the refined network has input scale 'pow2'"]


def exact_network(work: Network, intnet: IntegerNetwork, q_w: list[np.ndarray], q_b: list[np.ndarray]) -> Network:
    """The network whose weights and biases are exactly the integers over their scales."""
    layers = []
    for L, IL, w, b in zip(work.layers, intnet.layers, q_w, q_b):
        layers.append((np.ldexp(w.astype(np.float64), -IL.plan.weight_frac),
                       np.ldexp(b.astype(np.float64), -IL.acc_frac), L.activation))
    return work.replace_layers(layers)


def _free_values(intnet: IntegerNetwork, params: list[np.ndarray], start_w: list[np.ndarray],
                 start_b: list[np.ndarray], reach: int) -> list[FreeValue]:
    free: list[FreeValue] = []
    for li, L in enumerate(intnet.layers):
        p = L.plan
        wlo, whi = -(1 << (p.weight_bits - 1)), (1 << (p.weight_bits - 1)) - 1
        alo, ahi = -(1 << (p.acc_bits - 1)), (1 << (p.acc_bits - 1)) - 1
        wv = candidate_values(np.ldexp(params[2 * li], p.weight_frac), start_w[li], wlo, whi, reach)
        bv = candidate_values(np.ldexp(params[2 * li + 1], L.acc_frac), start_b[li], alo, ahi, reach)
        n_out, n_in = L.q_w.shape
        for j in range(n_out):
            for i in range(n_in + 1):
                vals = bv[j] if i == n_in else wv[j * n_in + i]
                if len(vals) > 1:
                    free.append(FreeValue(li, j, i, vals))
    return free


def _objective(work: Network, samples: Samples, target: str, n_out: int) -> Objective:
    weights = samples.counts / float(samples.total)
    last = work.layers[-1]
    x = np.ldexp(samples.inputs.T.astype(np.float64), -work.input_bits)
    hs = work.forward(x)
    z = (hs[-2] if len(hs) > 1 else x) @ last.weights.T + last.bias
    if n_out == 1:
        offset = logit_offset(last.activation, work.threshold)
        y = z[:, 0] if last.activation == "sigmoid" else hs[-1][:, 0]
        scale = 1.0 if last.activation == "sigmoid" else 1.0 / max(float(np.std(y - offset)), 1e-9)
        if target == "labels":
            t = samples.target.astype(np.float64)
        else:
            t = 1.0 / (1.0 + np.exp(-scale * (y - offset)))
        return Objective(t[None, :], weights, offset, scale)
    if target == "labels":
        t2 = np.eye(n_out)[samples.target].T
    else:
        y2 = hs[-1] - hs[-1].max(axis=1, keepdims=True)
        e = np.exp(y2)
        t2 = (e / e.sum(axis=1, keepdims=True)).T
    return Objective(t2, weights, 0.0, 1.0)


def refine(
    net: Network,
    plan: Plan,
    codes: Any,
    *,
    labels: Any = None,
    target: str | None = None,
    method: str = "rounding",
    budget_s: float | None = None,
    seed: int = 0,
    holdout: Any = None,
    holdout_labels: Any = None,
    holdout_fraction: float = 0.25,
    reach: int = 1,
    exhaustive_max: int = 16,
    exhaustive_work: int = 1 << 25,
    steps: int | None = None,
    epochs: int = 300,
    learning_rate: float = 0.05,
    patience: int = 60,
    progress: Callable[[int, int], None] | None = None,
    stop: Callable[[], bool] | None = None,
) -> Refinement:
    """Choose better integer weights and biases for ``plan``, with the data in view.

    Parameters
    ----------
    net, plan
        The float network and the fixed-point plan (unchanged; the plan is checked against the network).
    codes
        Samples to refine on: N x n_in unsigned codes or an H x W x n_in image.
    labels, target
        ``target="float"`` (the default without labels) counts decisions that differ from the
        float network's; ``"labels"`` (the default with labels) counts wrong labels.
    method
        ``"rounding"`` (choose each integer among its neighbours), ``"finetune"`` (quantisation-aware
        training with straight-through gradients) or ``"both"`` (fine-tuning, then rounding).
    budget_s, stop, progress
        Time budget in seconds, a callable that returns True to stop early (the best state so far is
        kept), and ``progress(done, total)``. Within budget the result is deterministic by ``seed``.
    holdout, holdout_labels, holdout_fraction
        Held-out samples (the figures report them; fine-tuning stops early on them). Without
        ``holdout``, a seeded ``holdout_fraction`` of ``codes`` is held out (0: none).
    reach, exhaustive_max, exhaustive_work, steps
        Rounding: candidates per value (1: floor and ceil; 2: one more each side); every
        combination is tried up to ``exhaustive_max`` free values and ``exhaustive_work``
        combination x distinct-sample evaluations, else ``steps`` annealing moves (default
        200 per free value) and coordinate descent.
    epochs, learning_rate, patience
        Fine-tuning: full-batch steps, Adam step in weight LSBs, steps without held-out gain.

    Returns
    -------
    Refinement
        Never worse than plain rounding on ``codes``' refined part: without gain it holds plain
        rounding's integers, with a note. Every figure is measured with ``emulate``.

    Examples
    --------
    >>> net = Network.from_layers([([[0.3, -0.55]], [0.1], "sigmoid")], input_names=["a", "b"])
    >>> plan = Plan.uniform(net, weight_bits=3, weight_frac=2, acc_bits=16, out_bits=8,
    ...                     table_bits=10, table_frac=6)
    >>> codes = np.stack(np.meshgrid(np.arange(0, 256, 5), np.arange(0, 256, 5)), -1).reshape(-1, 2)
    >>> r = refine(net, plan, codes, holdout_fraction=0)
    >>> r.after.errors <= r.before.errors
    True
    """
    t_start = time.monotonic()
    if not isinstance(net, Network):
        raise TypeError(f"net must be a Network, not {type(net).__name__}")
    if not isinstance(plan, Plan):
        raise TypeError(f"plan must be a Plan, not {type(plan).__name__}")
    plan.check(net)
    method = _choice("method", method, METHODS)
    target = _choice("target", ("labels" if labels is not None else "float") if target is None else target, TARGETS)
    if target == "labels" and labels is None:
        raise ValueError("labels must be given with target='labels', not None")
    if target == "float" and (labels is not None or holdout_labels is not None):
        raise ValueError("labels must be None with target='float' (they would be ignored), not given")
    if budget_s is not None and (isinstance(budget_s, bool) or not isinstance(budget_s, (int, float))
                                 or not budget_s > 0 or not math.isfinite(budget_s)):
        raise ValueError(f"budget_s must be None or a positive number of seconds, not {budget_s!r}")
    if not isinstance(seed, int) or isinstance(seed, bool):
        raise TypeError(f"seed must be an integer, not {seed!r}")
    if reach not in (1, 2) or isinstance(reach, bool):
        raise ValueError(f"reach must be 1 or 2, not {reach!r}")
    if not isinstance(holdout_fraction, (int, float)) or not 0 <= holdout_fraction < 1:
        raise ValueError(f"holdout_fraction must be at least 0 and below 1, not {holdout_fraction!r}")
    for name, v, lo in (("exhaustive_max", exhaustive_max, 0), ("exhaustive_work", exhaustive_work, 0),
                        ("epochs", epochs, 0), ("patience", patience, 1)):
        _count(name, v, lo)
    if steps is not None:
        _count("steps", steps, 0)
    if not isinstance(learning_rate, (int, float)) or not learning_rate > 0:
        raise ValueError(f"learning_rate must be a positive number, not {learning_rate!r}")
    k = len(net.classes) if net.n_out > 1 else 2

    flat, _ = as_codes(codes, net.input_bits, net.n_in)
    y = _labels(labels, flat.shape[0], k, "labels") if labels is not None else None
    if holdout is not None:
        hold, _ = as_codes(holdout, net.input_bits, net.n_in, what="holdout")
        if target == "labels":
            if holdout_labels is None:
                raise ValueError("holdout_labels must be given with holdout and target='labels', not None")
            hy = _labels(holdout_labels, hold.shape[0], k, "holdout_labels")
        train = flat
    else:
        if holdout_labels is not None:
            raise ValueError("holdout_labels must be None without holdout, not given")
        order = np.random.default_rng(seed).permutation(flat.shape[0])
        n_hold = int(round(holdout_fraction * flat.shape[0]))
        hold, train = flat[order[:n_hold]], flat[order[n_hold:]]
        if y is not None:
            hy, y = y[order[:n_hold]], y[order[n_hold:]]
    if train.shape[0] == 0:
        raise ValueError("codes must leave at least one sample to refine on, not 0")

    before_train = emulate(net, plan, train)
    before_hold = emulate(net, plan, hold) if hold.shape[0] else None
    t_train = before_train.float_decisions if target == "float" else y
    t_hold = None
    if before_hold is not None:
        t_hold = before_hold.float_decisions if target == "float" else hy
    assert t_train is not None

    work, notes = working_network(net)
    intnet = build_integer_network(work, plan)
    samples = Samples(train, t_train)
    hold_samples = Samples(hold, t_hold) if before_hold is not None and t_hold is not None else None
    q_w = [np.array(L.q_w) for L in intnet.layers]
    q_b = [np.array(L.q_b) for L in intnet.layers]
    start_errors = IntegerPass(intnet, samples, q_w, q_b).errors()
    params: list[np.ndarray] = []
    for L in work.layers:
        params += [L.weights.copy(), L.bias.copy()]
    deadline = None if budget_s is None else t_start + float(budget_s)
    log: list[str] = []
    span = [0, PROGRESS_TOTAL]

    def report(done: int, total: int) -> None:
        if progress is not None and total:
            progress(span[0] + (span[1] - span[0]) * min(done, total) // total, PROGRESS_TOTAL)

    if method in ("finetune", "both"):
        span[1] = int(PROGRESS_TOTAL * FINETUNE_SHARE) if method == "both" else PROGRESS_TOTAL
        ft_deadline = deadline
        if deadline is not None and method == "both":
            ft_deadline = t_start + FINETUNE_SHARE * float(budget_s or 0)
        obj = _objective(work, samples, target, net.n_out)
        ft = finetune(params, intnet, samples, obj, hold_samples, steps=epochs, learning_rate=learning_rate,
                      patience=patience, deadline=ft_deadline, stop=stop, progress=report)
        params, q_w, q_b = ft.params, ft.q_w, ft.q_b
        chosen = "best on the held-out samples" if hold_samples is not None else "best on the samples refined on"
        log.append(f"fine-tuning: {ft.steps} steps ({ft.stopped}), kept step {ft.best_step} ({chosen}): "
                   f"{ft.start_errors} -> {ft.train_errors} errors on the samples refined on")
        span[0] = span[1]
    if method in ("rounding", "both"):
        span[1] = PROGRESS_TOTAL
        ip = IntegerPass(intnet, samples, q_w, q_b)
        free = _free_values(intnet, params, q_w, q_b, reach)
        out = search_rounding(ip, free, seed=seed, exhaustive_max=exhaustive_max, exhaustive_work=exhaustive_work,
                              steps=steps, deadline=deadline, stop=stop, progress=report)
        q_w, q_b = out.q_w, out.q_b
        log.append(f"rounding: {out.method}: {out.start_errors} -> {out.errors} errors")
    found = IntegerPass(intnet, samples, q_w, q_b).errors()
    improved = found < start_errors
    if not improved:
        q_w = [np.array(L.q_w) for L in intnet.layers]
        q_b = [np.array(L.q_b) for L in intnet.layers]
        notes.append("no gain over plain rounding on the samples refined on: plain rounding's integers are kept")
    refined = exact_network(work, intnet, q_w, q_b)
    after_train = emulate(refined, plan, train)
    after_errors = int(np.count_nonzero(after_train.decisions != t_train))
    if after_errors != (found if improved else start_errors):  # the search's pass and the kernel must agree
        raise RuntimeError(f"refine: the kernel counts {after_errors} errors where the search counted {found}")
    after_hold = emulate(refined, plan, hold) if before_hold is not None else None

    def figures(e_train: Any, e_hold: Any) -> Figures:
        errs = int(np.count_nonzero(e_train.decisions != t_train))
        h_errs = None if e_hold is None else int(np.count_nonzero(e_hold.decisions != t_hold))
        return Figures(errs, int(train.shape[0]), h_errs, int(hold.shape[0]))

    if progress is not None:
        progress(PROGRESS_TOTAL, PROGRESS_TOTAL)
    return Refinement(refined, plan, figures(before_train, before_hold), figures(after_train, after_hold), target,
                      method, improved, time.monotonic() - t_start, tuple(log), tuple(notes))
