"""Refinement inside the search: better integers for a plan that plain rounding leaves outside the budget.

A refined network (:func:`fxnet_widgets.core.refine.refine`) has weights that are
exactly representable under its plan, so it is judged like any network, with
one difference: its decisions are compared with the *original* network's float
decisions (and outputs), never with the refined network's own float pass, which
:meth:`Emulation.mismatch` would use.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ...kernel import Emulation, emulate
from ...network import Network
from ..cost import hardware_cost
from ..metrics import ErrorMetrics, error_metrics
from .evaluate import argmax_ties
from .records import SweepRecord

__all__ = ["REFINE_METHODS", "RefineSettings", "Reference", "check_refine", "compare", "refine_record"]

#: the methods the search may refine with (fine-tuning alone is too slow per candidate)
REFINE_METHODS = ("rounding", "both")


@dataclass(frozen=True)
class RefineSettings:
    """How the search refines a candidate: ``method`` of :func:`refine` on at most ``samples`` of the
    data (a seeded subset), with ``steps`` annealing moves, ``epochs`` fine-tuning steps (``both``),
    an optional time limit ``budget_s`` per candidate (then results depend on the machine's speed),
    and at most ``tries`` candidates refined per round of :func:`tune`."""

    method: str = "rounding"
    samples: int = 20_000
    steps: int = 1000
    epochs: int = 150
    budget_s: float | None = None
    tries: int = 8
    seed: int = 0


def check_refine(refine: Any, options: Mapping[str, Any] | None = None) -> RefineSettings | None:
    """The checked settings of ``refine=`` (False/None: none; True: ``"rounding"``) and ``refine_options=``."""
    if refine is None or refine is False:
        if options:
            raise ValueError("refine_options must be None without refine, not given")
        return None
    if refine is True:
        refine = "rounding"
    if not isinstance(refine, str) or refine not in REFINE_METHODS:
        raise ValueError(f"refine must be False, True, 'rounding' or 'both', not {refine!r}")
    opts = dict(options or {})
    for k, v in opts.items():
        if k == "budget_s":
            if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float)) or not v > 0):
                raise ValueError(f"refine_options budget_s must be None or a positive number, not {v!r}")
        elif k in ("samples", "steps", "epochs", "tries", "seed"):
            if isinstance(v, bool) or not isinstance(v, int) or v < (1 if k in ("samples", "tries") else 0):
                raise ValueError(f"refine_options {k} must be a non-negative integer (samples, tries: positive), "
                                 f"not {v!r}")  # fmt: skip
        else:
            raise ValueError(f"refine_options key must be one of samples, steps, epochs, budget_s, tries, seed, "
                             f"not {k!r}")  # fmt: skip
    return RefineSettings(method=refine, **opts)


class Reference:
    """The original network's float pass on the (flat) data, and the seeded subset refined on."""

    def __init__(self, network: Network, flat: np.ndarray, settings: RefineSettings) -> None:
        self.network = network
        self.flat = flat
        self.out = network.predict(flat)
        self.decisions = network.decide(self.out)
        n = flat.shape[0]
        if n > settings.samples:
            pick = np.sort(np.random.default_rng(settings.seed).permutation(n)[: settings.samples])
            self.sample = flat[pick]
        else:
            self.sample = flat
        self.settings = settings


def compare(e: Emulation, ref_out: np.ndarray, ref_decisions: np.ndarray, labels: Any = None) -> ErrorMetrics:
    """:func:`error_metrics` of ``e`` with every float figure taken from the given reference
    (the original network's float outputs ``ref_out``, N x n_out, and decisions), not ``e``'s own."""
    m = error_metrics(e, labels)
    n = e.n
    last = e.integer_network.layers[-1]
    out_frac = int(last.out_frac)
    ref = np.asarray(ref_out, dtype=np.float64).reshape(n, -1)
    fixed = np.ldexp(np.asarray(e.out_codes, dtype=np.float64).reshape(n, -1), -out_frac)
    err = np.abs(fixed - ref)
    mx = err.max(axis=0) if n else np.zeros(err.shape[1])
    mn = err.mean(axis=0) if n else np.zeros(err.shape[1])
    fdec = np.asarray(ref_decisions).reshape(-1)
    dec = np.asarray(e.decisions).reshape(-1)
    mismatch = int(np.count_nonzero(dec != fdec))
    per = err.max(axis=1) if err.shape[1] else np.zeros(n)
    per = per.reshape(e.shape) if e.shape is not None else per
    per.setflags(write=False)
    scale = 2.0**out_frac
    float_acc = m.float_accuracy
    if labels is not None and n:
        float_acc = float(np.count_nonzero(fdec == np.asarray(labels).reshape(-1)) / n)
    return replace(
        m, mismatch=mismatch, mismatch_fraction=mismatch / n if n else 0.0,
        max_abs_error=tuple(float(v) for v in mx), mean_abs_error=tuple(float(v) for v in mn),
        max_abs_error_lsb=tuple(float(v * scale) for v in mx), mean_abs_error_lsb=tuple(float(v * scale) for v in mn),
        float_accuracy=float_acc, per_sample_error=per,
    )  # fmt: skip


def refine_record(
    ref: Reference, labels: np.ndarray | None, rec: SweepRecord, index: int, cost_key: str, options: dict[str, Any]
) -> SweepRecord | None:
    """``rec``'s plan with refined integers, judged against the original float on all the data;
    None when refinement finds no gain (or the plan cannot be refined)."""
    from ...refine import refine  # lazily: the search without refinement does not need it

    s = ref.settings
    try:
        r = refine(ref.network, rec.plan, ref.sample, method=s.method, steps=s.steps, epochs=s.epochs,
                   budget_s=s.budget_s, seed=s.seed)  # fmt: skip
    except ValueError:
        return None
    if not r.improved:
        return None
    e = emulate(r.network, rec.plan, ref.flat)
    m = compare(e, ref.out, ref.decisions, labels)
    cost = hardware_cost(r.network, rec.plan, **options)
    ties, tied_agreeing = argmax_ties(e.out_codes, e.decisions, ref.decisions)
    summary = {k: v for k, v in r.to_dict().items() if k != "seconds"}  # deterministic: no timing
    return replace(
        rec, index=index, cost=cost.value(cost_key), costs=cost.totals(), mismatch=m.mismatch,
        mismatch_fraction=m.mismatch_fraction, max_abs_error_lsb=max(m.max_abs_error_lsb),
        mean_abs_error_lsb=float(np.mean(m.mean_abs_error_lsb)), accuracy=m.accuracy, events=m.events,
        ties=ties, tied_agreeing=tied_agreeing, refined_network=r.network.to_dict(), refinement=summary,
    )  # fmt: skip
