"""Fine-tuning the float weights with the integer forward pass in the loop (numpy only).

Quantisation-aware training with a straight-through estimator: every step runs
the *exact* integer network of the current float weights (the plan's rounding of
weights and biases, the accumulator, the table or shift, every clamp: the kernel's
own :func:`~fxnet_widgets.core.kernel.post_accumulate`), and the gradient passes
straight through each rounding step as if it were the identity. The table passes
the activation's derivative at the accumulator's real value; a clamp or an
overflow passes nothing. The gradient is thus that of the *relaxed* network
(:func:`relaxed_loss`: real weights, real activations), evaluated at the integer
network's operating point; ``tests/core/test_refine.py`` checks the relaxed
gradient against finite differences.

Adam (Kingma & Ba, 2015) on full batches of the distinct samples (weighted by
their counts); the step size is in units of each layer's weight LSB. Every
step's integer network is scored on the training and held-out samples, and the
best held-out one (among those no worse on the training samples than where it
started) is kept: early stopping on held-out pixels.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..formats import round_float, signed_range
from ..kernel import IntegerNetwork, post_accumulate
from ..network import activate
from ._integer import IntegerPass, Samples, decisions_from_codes

__all__ = ["Objective", "relaxed_loss", "integer_loss", "finetune", "FinetuneOutcome"]


@dataclass(frozen=True)
class Objective:
    """What the loss pulls the output towards: per sample soft targets (n_out x P) and counts.

    One output: targets are probabilities of a positive decision, the logit is
    ``scale * (y - offset)`` (sigmoid outputs: ``y`` is the pre-activation, so the
    logit is the sum minus the threshold's logit). Several outputs: softmax
    cross-entropy over the outputs' values.
    """

    targets: np.ndarray
    weights: np.ndarray  # counts / total
    offset: float
    scale: float


def _dact(z: np.ndarray, activation: str) -> np.ndarray:
    if activation == "sigmoid":
        y = activate(z, "sigmoid")
        return y * (1.0 - y)
    if activation == "tanh":
        return 1.0 - np.tanh(z) ** 2
    if activation == "relu":
        return (z > 0).astype(np.float64)
    return np.ones_like(z)


def _output_grad(z: np.ndarray, activation: str, obj: Objective) -> tuple[float, np.ndarray]:
    """Loss and its gradient by the last layer's pre-activation ``z`` (n_out x P)."""
    w = obj.weights
    if z.shape[0] == 1:
        y = z[0] if activation == "sigmoid" else activate(z[0], activation)
        m = obj.scale * (y - obj.offset)
        p = activate(m, "sigmoid")
        t = obj.targets[0]
        # binary cross-entropy in the logit, written to stay finite: log(1+e^m) - t m
        loss = float(np.sum(w * (np.logaddexp(0.0, m) - t * m)))
        g = (p - t) * obj.scale
        if activation != "sigmoid":
            g = g * _dact(z[0], activation)
        return loss, (w * g)[None, :]
    y = activate(z, activation)
    ym = y - y.max(axis=0, keepdims=True)
    logp = ym - np.log(np.exp(ym).sum(axis=0, keepdims=True))
    loss = float(-np.sum(w * np.sum(obj.targets * logp, axis=0)))
    g = (np.exp(logp) - obj.targets) * _dact(z, activation)
    return loss, w[None, :] * g


def _backward(weights: list[np.ndarray], acts: list[str], hs: list[np.ndarray], zs: list[np.ndarray],
              masks: list[np.ndarray], g: np.ndarray) -> list[np.ndarray]:
    """Gradients ``[dW_1, db_1, ...]`` from the output gradient ``g`` (n_out x P)."""
    grads: list[np.ndarray] = [np.empty(0)] * (2 * len(weights))
    for li in range(len(weights) - 1, -1, -1):
        grads[2 * li] = g @ hs[li].T
        grads[2 * li + 1] = g.sum(axis=1)
        if li:
            g = (weights[li].T @ g) * _dact(zs[li - 1], acts[li - 1]) * masks[li - 1]
    return grads


def relaxed_loss(params: list[np.ndarray], acts: list[str], x: np.ndarray, out_max: list[float],
                 obj: Objective) -> tuple[float, list[np.ndarray]]:
    """Loss and exact gradient of the relaxed network: real weights, real activations.

    ``x`` is n_in x P real inputs; hidden outputs are clipped to ``[0 or -max, out_max]``
    like the integer codes (the gradient is zero where a clip holds). This is the
    function whose gradient the straight-through estimator uses.
    """
    hs, zs, masks = [x], [], []
    n = len(acts)
    for li in range(n):
        z = params[2 * li] @ hs[-1] + params[2 * li + 1][:, None]
        zs.append(z)
        if li < n - 1:
            y = activate(z, acts[li])
            lo = 0.0 if acts[li] in ("sigmoid", "relu") else -out_max[li] - 2.0 ** -20
            inside = (y >= lo) & (y <= out_max[li])
            masks.append(inside.astype(np.float64))
            hs.append(np.clip(y, lo, out_max[li]))
    loss, g = _output_grad(zs[-1], acts[-1], obj)
    return loss, _backward(params[0::2], acts, hs, zs, masks, g)


def quantised(params: list[np.ndarray], intnet: IntegerNetwork) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """The plan's integers of real weights and biases (rounding and clamps of steps 1-2)."""
    q_w, q_b = [], []
    for li, L in enumerate(intnet.layers):
        p = L.plan
        wlo, whi = signed_range(p.weight_bits)
        alo, ahi = signed_range(p.acc_bits)
        q_w.append(np.clip(round_float(np.ldexp(params[2 * li], p.weight_frac), p.weight_round), wlo, whi)
                   .astype(np.int64))
        q_b.append(np.clip(round_float(np.ldexp(params[2 * li + 1], L.acc_frac), p.weight_round), alo, ahi)
                   .astype(np.int64))
    return q_w, q_b


def integer_loss(params: list[np.ndarray], intnet: IntegerNetwork, samples: Samples,
                 obj: Objective) -> tuple[float, list[np.ndarray], int]:
    """Loss, straight-through gradient and errors of the integer network of ``params``."""
    q_w, q_b = quantised(params, intnet)
    u = samples.inputs
    hs = [np.ldexp(u.astype(np.float64), -intnet.layers[0].in_frac)]
    zs, masks, weights, acts = [], [], [], []
    for li, L in enumerate(intnet.layers):
        s = q_b[li][:, None] + q_w[li] @ u
        res = post_accumulate(L, s)
        zs.append(np.ldexp(s.astype(np.float64), -L.acc_frac))
        keep = np.ones(s.shape, dtype=bool)
        for name in ("acc_overflow", "table_low", "table_high"):
            ev = res[name]
            if ev is not None:
                keep &= ~np.asarray(ev, dtype=bool)
        masks.append(keep.astype(np.float64))
        weights.append(np.ldexp(q_w[li].astype(np.float64), -L.plan.weight_frac))
        acts.append(L.activation)
        u = np.asarray(res["codes"], dtype=np.int64)
        hs.append(np.ldexp(u.astype(np.float64), -L.out_frac))
    dec = decisions_from_codes(u, intnet.threshold_code)
    errors = int(samples.counts[dec != samples.target].sum())
    loss, g = _output_grad(zs[-1], acts[-1], obj)
    g = g * masks[-1]
    return loss, _backward(weights, acts, hs[:-1], zs, masks, g), errors


@dataclass
class FinetuneOutcome:
    params: list[np.ndarray]
    q_w: list[np.ndarray]
    q_b: list[np.ndarray]
    train_errors: int
    holdout_errors: int | None
    start_errors: int
    steps: int
    best_step: int
    stopped: str


def finetune(params: list[np.ndarray], intnet: IntegerNetwork, samples: Samples, obj: Objective,
             holdout: Samples | None, *, steps: int, learning_rate: float, patience: int,
             deadline: float | None, stop: Callable[[], bool] | None,
             progress: Callable[[int, int], None] | None) -> FinetuneOutcome:
    """Adam on ``params`` ([W_1, b_1, ...], real units) with the integer forward pass in the loop."""
    params = [p.astype(np.float64).copy() for p in params]
    lr = [learning_rate * 2.0 ** -L.plan.weight_frac for L in intnet.layers for _ in (0, 1)]
    bounds = []
    for L in intnet.layers:  # keep each weight where its rounding still lands in range (half an LSB beyond)
        lo, hi = signed_range(L.plan.weight_bits)
        bounds.append(((lo - 0.5) * 2.0 ** -L.plan.weight_frac, (hi + 0.5) * 2.0 ** -L.plan.weight_frac))
        alo, ahi = signed_range(L.plan.acc_bits)
        bounds.append(((alo - 0.5) * 2.0 ** -L.acc_frac, (ahi + 0.5) * 2.0 ** -L.acc_frac))
    mom = [np.zeros_like(p) for p in params]
    vel = [np.zeros_like(p) for p in params]
    b1, b2, eps = 0.9, 0.999, 1e-12
    best: tuple[float, int, int] | None = None
    best_state: tuple[list[np.ndarray], list[np.ndarray], list[np.ndarray]] | None = None
    best_hold: int | None = None
    start_errors = -1
    since = 0
    stopped = "all steps"
    step = 0
    for step in range(steps + 1):
        _, grads, errors = integer_loss(params, intnet, samples, obj)
        if step == 0:
            start_errors = errors
        q_w, q_b = quantised(params, intnet)
        hold = IntegerPass(intnet, holdout, q_w, q_b).errors() if holdout is not None else None
        if errors <= start_errors:
            key = (float(hold if hold is not None else errors), errors, step)
            if best is None or key[:2] < best[:2]:
                best, best_state, best_hold, since = key, ([p.copy() for p in params], q_w, q_b), hold, 0
            else:
                since += 1
        else:
            since += 1
        if progress is not None:
            progress(step, steps)
        if step == steps:
            break
        if since >= patience:
            stopped = f"no held-out gain for {patience} steps"
            break
        if (deadline is not None and time.monotonic() >= deadline) or (stop is not None and stop()):
            stopped = "budget or stop"
            break
        t = step + 1
        for j, g in enumerate(grads):
            mom[j] = b1 * mom[j] + (1 - b1) * g
            vel[j] = b2 * vel[j] + (1 - b2) * g * g
            upd = (mom[j] / (1 - b1**t)) / (np.sqrt(vel[j] / (1 - b2**t)) + eps)
            params[j] = np.clip(params[j] - lr[j] * upd, *bounds[j])
    assert best is not None and best_state is not None  # step 0 always qualifies
    p, q_w, q_b = best_state
    return FinetuneOutcome(p, q_w, q_b, int(best[1]), best_hold, start_errors, step, int(best[2]), stopped)


def logit_offset(activation: str, threshold: float) -> float:
    """The decision boundary of one output in the logit that :class:`Objective` uses."""
    if activation == "sigmoid" and 0.0 < threshold < 1.0:
        return math.log(threshold / (1.0 - threshold))
    return threshold
