"""``fxnet cost NETWORK PLAN [--video 1280x720p60] [--json]``."""

from __future__ import annotations

import argparse
from typing import Any

from ..core.analysis.cost import hardware_cost
from ..core.analysis.video import DEFAULT_MAX_CLOCK_HZ, VIDEO_FORMATS, throughput
from ._common import CliError, load_network, load_plan, print_json


def _size(text: str) -> tuple[int, int]:
    a, x, b = text.lower().partition("x")
    try:
        if not x:
            raise ValueError
        return int(a), int(b)
    except ValueError:
        raise CliError(f"fxnet cost: --multiplier-size must be AxB (e.g. 18x18), not {text!r}") from None


def _hz(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        v = float("nan")
    if not v > 0 or v == float("inf"):
        raise CliError(f"fxnet cost: --max-clock must be a positive number of Hz (e.g. 200e6), not {text!r}")
    return v


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("cost", help="analytic hardware cost of a plan (adders, multipliers, tables, registers)")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument(
        "--video", metavar="FORMAT", help=f"check one-pixel-per-clock throughput ({', '.join(VIDEO_FORMATS)})"
    )
    p.add_argument("--max-clock", metavar="HZ", default=None, help="highest clock of the design (default 200e6)")
    p.add_argument("--multipliers", default="csd", help="csd (constant weights, shift-and-add; default) or hard")
    p.add_argument("--multiplier-size", metavar="AxB", default="18x18", help="hard multiplier operand widths")
    p.add_argument("--block-bits", type=int, default=18432, metavar="N", help="bits per memory block (18432)")
    p.add_argument("--pipeline-stages", type=int, default=3, metavar="N", help="register stages per layer (3)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    if args.multipliers not in ("csd", "hard"):
        raise CliError(f"fxnet cost: --multipliers must be one of csd, hard, not {args.multipliers!r}")
    if args.video is not None and args.video not in VIDEO_FORMATS:
        raise CliError(f"fxnet cost: --video must be one of {', '.join(VIDEO_FORMATS)}, not {args.video!r}")
    max_clock = DEFAULT_MAX_CLOCK_HZ if args.max_clock is None else _hz(args.max_clock)
    cost = hardware_cost(
        net, plan, multipliers=args.multipliers, multiplier_size=_size(args.multiplier_size),
        block_bits=args.block_bits, pipeline_stages=args.pipeline_stages,
    )  # fmt: skip
    doc: dict[str, Any] = {"network": args.network, "plan": args.plan, "cost": cost.to_dict()}
    tp = throughput(args.video, max_clock) if args.video else None
    if tp is not None:
        doc["video"] = tp.to_dict()
    if args.json:
        print_json(doc)
    else:
        print(cost.summary())
        if tp is not None:
            print(tp.summary())
    return 0
