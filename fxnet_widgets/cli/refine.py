"""``fxnet refine NETWORK PLAN INPUT [--labels FILE] -o REFINED.json``."""

from __future__ import annotations

import argparse
import math
import sys
from typing import Any

import numpy as np

from ..core.refine import METHODS, refine
from ._common import CliError, check_output_path, load_input, load_network, load_plan, print_json
from .sweep import load_labels

DEFAULT_SAMPLES = 20_000


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("refine", help="better integer weights for the same plan (rounding choice, fine-tuning)")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument("input", help="image file (RGB) or .npy of unsigned codes, N x n_in")
    p.add_argument("-o", "--output", required=True, help="refined network file to write (.json)")
    p.add_argument("--labels", metavar="FILE", help="class labels: .npy of indices, or a mask image (white = 1); "
                                                    "without them the target is the float network's decisions")
    p.add_argument("--holdout", metavar="INPUT", help="held-out image or .npy (default: a quarter of the samples)")
    p.add_argument("--holdout-labels", metavar="FILE", help="labels of --holdout")
    p.add_argument("--method", default="rounding", help=f"{', '.join(METHODS)} (default rounding)")
    p.add_argument("--budget", type=float, default=None, metavar="S", help="time budget in seconds")
    p.add_argument("--seed", type=int, default=0, help="seed of the sample, the split and the search")
    p.add_argument("--samples", type=int, default=DEFAULT_SAMPLES, metavar="N",
                   help=f"refine on a seeded sample of N input samples (default {DEFAULT_SAMPLES}; 0: all)")
    p.add_argument("--uniform", type=int, default=0, metavar="N",
                   help="also refine on N seeded codes drawn uniformly from the whole input range (float target "
                        "only): agreement beyond the colours of INPUT, e.g. under other lighting")
    p.add_argument("--reach", type=int, default=1, choices=(1, 2), help="candidates: 1 floor/ceil, 2 one more each")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=run)


def _flat(codes: np.ndarray) -> np.ndarray:
    return codes.reshape(-1, codes.shape[-1])


def _progress(args: argparse.Namespace) -> Any:
    if args.quiet or not sys.stderr.isatty():
        return None

    def report(done: int, total: int) -> None:
        n = 30 * done // max(total, 1)
        end = "\n" if done >= total else ""
        print(f"\rrefine [{'#' * n}{'.' * (30 - n)}] {100 * done // max(total, 1):3d} %", end=end, file=sys.stderr)

    return report


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    if args.method not in METHODS:
        raise CliError(f"fxnet refine: --method must be one of {', '.join(METHODS)}, not {args.method!r}")
    if args.budget is not None and not (math.isfinite(args.budget) and args.budget > 0):
        raise CliError(f"fxnet refine: --budget must be a positive number of seconds, not {args.budget!r}")
    if args.samples < 0:
        raise CliError(f"fxnet refine: --samples must be at least 0, not {args.samples}")
    if args.uniform < 0:
        raise CliError(f"fxnet refine: --uniform must be at least 0, not {args.uniform}")
    if args.uniform and args.labels:
        raise CliError("fxnet refine: --uniform needs the float target (no --labels): uniform codes have no labels")
    if args.holdout_labels and not args.holdout:
        raise CliError("fxnet refine: --holdout-labels must come with --holdout")
    if args.holdout and bool(args.labels) != bool(args.holdout_labels):
        raise CliError("fxnet refine: --holdout-labels must be given exactly when --labels is (with --holdout)")
    codes, note = load_input(args.input, net)
    labels = load_labels(args.labels, net, codes).reshape(-1) if args.labels else None
    out = check_output_path(args.output, ".json")
    flat = _flat(codes)
    if args.samples and args.samples < flat.shape[0]:
        pick = np.sort(np.random.default_rng(args.seed).choice(flat.shape[0], args.samples, replace=False))
        flat = flat[pick]
        labels = labels[pick] if labels is not None else None
    if args.uniform:
        rng = np.random.default_rng([args.seed, 1])
        extra = rng.integers(0, 1 << net.input_bits, (args.uniform, net.n_in), dtype=np.int64)
        flat = np.concatenate([flat.astype(np.int64), extra])
    hold = hold_labels = None
    if args.holdout:
        hcodes, _ = load_input(args.holdout, net)
        hold = _flat(hcodes)
        if args.holdout_labels:
            hold_labels = load_labels(args.holdout_labels, net, hcodes).reshape(-1)
    res = refine(net, plan, flat, labels=labels, method=args.method, budget_s=args.budget, seed=args.seed,
                 holdout=hold, holdout_labels=hold_labels, reach=args.reach, progress=_progress(args))
    res.network.save(out)
    if args.json:
        doc = res.to_dict()
        doc["output"] = out
        doc["input"] = {"file": args.input, "note": note, "samples": int(flat.shape[0])}
        print_json(doc)
    else:
        if note:
            print(f"input {args.input}: {note}")
        print(res.summary())
        print(f"wrote {out} (weights and biases exact under {args.plan}; use it with that plan)")
    return 0
