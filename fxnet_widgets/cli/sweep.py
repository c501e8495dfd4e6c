"""``fxnet sweep NETWORK DATA --grid 'weight_frac=3:8,table_bits=8:14' -o sweep.json``."""

from __future__ import annotations

import argparse
import os
import sys
from typing import Any

import numpy as np

from ..core.analysis.cost import CALIBRATED_KEYS, COST_KEYS
from ..core.analysis.metrics import check_labels
from ..core.analysis.search import SerialExecutor, local_pool, pareto_front, parse_grid, sweep, text_progress
from ..core.fileio import atomic_write_json, load_npy
from ..core.images import read_image
from ..core.network import Network
from ._common import CliError, check_output_path, load_input, load_network, load_plan, print_json


def load_labels(path: str, network: Network, codes: np.ndarray) -> np.ndarray:
    """Labels from a ``.npy`` of class indices or a black/white mask image (white is class 1)."""
    n = int(np.prod(codes.shape[:-1]))
    shape = tuple(codes.shape[:2]) if codes.ndim == 3 else None
    if path.lower().endswith(".npy"):
        arr = load_npy(path)
    else:
        if not os.path.exists(path):
            raise CliError(f"fxnet: {path}: no such file")
        img = read_image(path).codes
        white = (img == 255).all(axis=2)
        bad = ~(white | (img == 0).all(axis=2))
        if bad.any():
            y, x = (int(v) for v in np.argwhere(bad)[0])
            raise CliError(
                f"fxnet: {path}: mask pixels must be black (0) or white (255), "
                f"not {tuple(int(c) for c in img[y, x])} at x={x}, y={y}"
            )
        arr = white.astype(np.int64)
    try:
        return check_labels(arr, n, shape, len(network.classes))
    except (TypeError, ValueError) as exc:
        raise type(exc)(f"{path}: {exc}") from None


def executor_for(workers: int | None) -> Any:
    """``--workers``: None, the default policy; 0, this process; N, a local pool of N."""
    if workers is None:
        return None
    if workers < 0:
        raise CliError(f"fxnet: --workers must be at least 0, not {workers}")
    return SerialExecutor() if workers == 0 else local_pool(workers)


def progress_for(args: argparse.Namespace) -> Any:
    return None if args.quiet or not sys.stderr.isatty() else text_progress(sys.stderr)


def add_common(p: argparse.ArgumentParser) -> None:
    p.add_argument("--labels", metavar="FILE", help="class labels: .npy of indices, or a mask image (white = 1)")
    p.add_argument("--cost", default="total_bits", help=f"cost total to minimise ({', '.join(COST_KEYS)})")
    p.add_argument("--workers", type=int, default=None, metavar="N", help="worker processes (0: this process)")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--target", default="ice40-up5k", metavar="T",
                   help="device of the calibrated estimates --cost luts|ffs|brams (default ice40-up5k)")  # fmt: skip
    p.add_argument("--refine", nargs="?", const="rounding", choices=("rounding", "both"), default=None,
                   help="refine the integers of plans that miss (rounding, the default, or both)")  # fmt: skip


def check_cost(key: str) -> str:
    if key not in COST_KEYS:
        raise CliError(f"fxnet: --cost must be one of {', '.join(COST_KEYS)}, not {key!r}")
    return key


def check_target(command: str, target: str, cost: str) -> str:
    """``--target``: a synthesis target; with a calibrated ``--cost``, one with a calibration."""
    from ..core.synth import TARGETS
    from ..core.synth.calibration import calibrations

    if target not in TARGETS:
        raise CliError(f"fxnet {command}: --target must be one of {', '.join(TARGETS)}, not {target!r}")
    cals = calibrations()
    if cost in CALIBRATED_KEYS and target not in cals:
        raise CliError(f"fxnet {command}: --target must be a calibrated target with --cost {cost} "
                       f"({', '.join(sorted(cals)) or 'none'}), not {target!r}")  # fmt: skip
    return target


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("sweep", help="evaluate a grid of plans (cost and disagreement) and its Pareto front")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("data", help="image file (RGB) or .npy of unsigned codes, N x n_in")
    p.add_argument("--grid", required=True, help="FIELD=A:B[:STEP] or FIELD=V1|V2, comma-separated")
    p.add_argument("-o", "--output", required=True, help="sweep result file (.json)")
    p.add_argument("--plan", metavar="PLAN", help="base plan the grid changes (default: the generous start plan)")
    p.add_argument("--layer", type=int, metavar="N", help="apply the grid to layer N only (1-based)")
    p.add_argument("--no-safe-acc", action="store_true", help="keep acc_bits as given instead of the safe width")
    p.add_argument(
        "--no-keep-range", action="store_true", help="a width alone in the grid keeps its frac (the range changes)"
    )
    add_common(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    try:
        grid = parse_grid(args.grid)
    except (TypeError, ValueError) as exc:
        raise CliError(f"fxnet sweep: --grid: {exc}") from None
    base = load_plan(args.plan, net) if args.plan else None
    codes, note = load_input(args.data, net)
    labels = load_labels(args.labels, net, codes) if args.labels else None
    out = check_output_path(args.output, ".json")
    cost = check_cost(args.cost)
    target = check_target("sweep", args.target, cost)
    layer = None
    if args.layer is not None:
        if not 1 <= args.layer <= len(net.layers):
            raise CliError(f"fxnet sweep: --layer must be between 1 and {len(net.layers)}, not {args.layer}")
        layer = args.layer - 1
    ex = executor_for(args.workers)
    try:
        records = sweep(
            net, codes, grid, base=base, layer=layer, labels=labels, safe_acc=not args.no_safe_acc,
            keep_range=not args.no_keep_range, cost=cost, cost_options={"target": target},
            executor=ex, progress=progress_for(args), refine=args.refine or False,
        )  # fmt: skip
    finally:
        if ex is not None:
            ex.shutdown()
    front = pareto_front(records)
    doc = {
        "kind": "fxnet.sweep",
        "version": 1,
        "network": {"file": args.network, "digest": net.digest},
        "data": {"file": args.data, "samples": int(np.prod(codes.shape[:-1])), "note": note},
        "labels": args.labels,
        "grid": grid,
        "layer": args.layer,
        "cost_key": cost,
        "target": target,
        "refine": args.refine,
        "records": [r.to_dict() for r in records],
        "pareto": [r.index for r in front],
    }
    atomic_write_json(out, doc)
    refused = sum(1 for r in records if not r.ok)
    if args.json:
        print_json(
            {
                "output": out,
                "plans": len(records),
                "refused": refused,
                "pareto": [
                    {"settings": dict(r.settings), "cost": r.cost, "mismatch": r.mismatch,
                     "mismatch_fraction": r.mismatch_fraction, "refined": r.refined}
                    for r in front
                ],
            }  # fmt: skip
        )
    else:
        if note:
            print(f"input {args.data}: {note}")
        print(f"sweep of {len(records)} plans ({refused} refused by the kernel); Pareto front by {cost} and mismatch:")
        for r in front:
            settings = ", ".join(f"{k}={v}" for k, v in r.settings)
            print(f"  {settings}: {cost} {r.cost}, mismatch {r.mismatch} ({100 * (r.mismatch_fraction or 0):.4f} %)"
                  + (" (refined integers)" if r.refined else ""))  # fmt: skip
        if args.refine:
            n_ref = sum(1 for r in records if r.refined)
            print(f"refined ({args.refine}): {n_ref} plans met fewer differences with refined integers; their "
                  "networks are in the records (refined_network), compared with the original float")  # fmt: skip
        if cost in CALIBRATED_KEYS:
            print(f"{cost}: calibrated estimates for {target}, not synthesis results")
        print(f"wrote {out}")
    return 0
