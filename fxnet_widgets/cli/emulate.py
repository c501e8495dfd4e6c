"""``fxnet emulate NETWORK PLAN INPUT -o OUT.npz [--json]``."""

from __future__ import annotations

import argparse

import numpy as np

from ..core.fileio import atomic_writer
from ..core.kernel import emulate
from ._common import check_output_path, load_input, load_network, load_plan, print_json


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("emulate", help="run the bit-exact integer network on an image or .npy of codes")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument("input", help="image file (RGB) or .npy of unsigned codes, N x n_in")
    p.add_argument("-o", "--output", required=True, help="result file (.npz)")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    codes, note = load_input(args.input, net)
    out = check_output_path(args.output, ".npz")
    result = emulate(net, plan, codes)
    arrays = result.npz_arrays()
    atomic_writer(out, lambda fh: np.savez(fh, **arrays))  # streamed: no second copy in memory
    summary = result.summary_dict()
    summary["input"] = {"file": args.input, "note": note}
    summary["output"] = out
    if args.json:
        print_json(summary)
    else:
        if note:
            print(f"input {args.input}: {note}")
        print(result.summary())
        print(f"wrote {out}")
    return 0
