"""``fxnet export NETWORK PLAN -o DIR [--vectors INPUT] [--force] [--json]``."""

from __future__ import annotations

import argparse

from ..core.export import export
from ._common import load_input, load_network, load_plan, print_json


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "export",
        help="write the hardware hand-off: VHDL package, Verilog include, C header, table images, golden vectors",
    )
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="directory to create (missing or empty)")
    p.add_argument("--vectors", metavar="INPUT", help="image file (RGB) or .npy of codes (N x n_in) for golden vectors")
    p.add_argument("--force", action="store_true", help="replace a non-empty DIR (atomically)")
    p.add_argument("--json", action="store_true", help="print what was written as one JSON object")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    codes, note = (None, "")
    if args.vectors is not None:
        codes, note = load_input(args.vectors, net)
    result = export(net, plan, args.output, vectors=codes, force=args.force)
    if args.json:
        print_json(
            {
                "directory": str(result.directory),
                "files": list(result.files),
                "vectors": result.n_vectors,
                "input": None if args.vectors is None else {"file": args.vectors, "note": note},
            }
        )
    else:
        if note:
            print(f"input {args.vectors}: {note}")
        print(result.summary())
        for name in result.files:
            print(f"  {name}")
    return 0
