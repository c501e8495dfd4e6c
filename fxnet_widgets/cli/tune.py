"""``fxnet tune NETWORK DATA --max-mismatch 0.001 -o PLAN.json``."""

from __future__ import annotations

import argparse

from ..core.analysis.search import tune
from ._common import CliError, check_output_path, load_input, load_network, load_plan, print_json
from .sweep import add_common, check_cost, executor_for, load_labels, progress_for


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("tune", help="find the cheapest plan whose decisions stay within an error budget")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("data", help="image file (RGB) or .npy of unsigned codes, N x n_in")
    p.add_argument(
        "--max-mismatch", required=True, metavar="F", help="fraction of decisions that may differ from float"
    )
    p.add_argument("-o", "--output", required=True, help="plan file to write (.json)")
    p.add_argument("--start", metavar="PLAN", help="starting plan (default: the generous, overflow-free start)")
    add_common(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    try:
        budget = float(args.max_mismatch)
    except ValueError:
        budget = float("nan")
    if not 0 <= budget <= 1:
        raise CliError(f"fxnet tune: --max-mismatch must be a fraction between 0 and 1, not {args.max_mismatch!r}")
    start = load_plan(args.start, net) if args.start else None
    codes, note = load_input(args.data, net)
    labels = load_labels(args.labels, net, codes) if args.labels else None
    out = check_output_path(args.output, ".json")
    cost = check_cost(args.cost)
    ex = executor_for(args.workers)
    try:
        res = tune(net, codes, budget, labels=labels, start=start, cost=cost, executor=ex, progress=progress_for(args))
    finally:
        if ex is not None:
            ex.shutdown()
    res.plan.save(out)
    if args.json:
        doc = res.to_dict()
        doc["output"] = out
        print_json(doc)
    else:
        if note:
            print(f"input {args.data}: {note}")
        print(res.summary())
        print(res.metrics.summary())
        print(res.cost.summary())
        print(f"wrote {out}")
    return 0
