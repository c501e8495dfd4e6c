"""``fxnet datapath NETWORK PLAN -o DIR [--pipeline auto|N] [--products multiply|shift-add]
[--clock MHZ | --video FORMAT] [--testbench [INPUT]] [--force] [--json]``."""

from __future__ import annotations

import argparse

from ..core.analysis.video import VIDEO_FORMATS
from ..core.datapath import write_datapath
from ._common import CliError, load_input, load_network, load_plan, print_json


def _pipeline(text: str) -> str | int:
    if text == "auto":
        return "auto"
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be 'auto' or a number of register stages, not {text!r}") from None


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "datapath",
        help="write the reference datapath: synthesizable Verilog-2005 and VHDL-2008, tables, datapath.json",
    )
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="directory to create (missing or empty)")
    p.add_argument("--pipeline", type=_pipeline, default="auto", metavar="auto|N",
                   help="'auto' (registers where a rough iCE40 delay model needs them) or N stages")  # fmt: skip
    p.add_argument("--products", choices=["multiply", "shift-add"], default="multiply",
                   help="weight products as constant multiplications (default) or shift-add of CSD digits")  # fmt: skip
    clock = p.add_mutually_exclusive_group()
    clock.add_argument("--clock", type=float, metavar="MHZ", help="clock for --pipeline auto (default 74.25)")
    clock.add_argument("--video", choices=sorted(VIDEO_FORMATS), metavar="FORMAT",
                       help="video format whose pixel clock --pipeline auto aims at (e.g. 1280x720p60)")  # fmt: skip
    p.add_argument("--testbench", nargs="?", const=True, default=None, metavar="INPUT",
                   help="also write self-checking benches; vectors from INPUT (image or .npy of codes), "
                        "else every input (at most 2^12) or 1000 seeded random ones")  # fmt: skip
    p.add_argument("--force", action="store_true", help="replace a non-empty DIR (atomically)")
    p.add_argument("--json", action="store_true", help="print datapath.json's content as one JSON object")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    bench = args.testbench
    note = ""
    if isinstance(bench, str):
        bench, note = load_input(bench, net)
        bench = bench.reshape(-1, net.n_in)
    if args.clock is not None and not 0 < args.clock <= 2000:
        raise CliError(f"fxnet datapath: --clock must be above 0 and at most 2000 MHz, not {args.clock!r}")
    r = write_datapath(net, plan, args.output, pipeline=args.pipeline, clock_mhz=args.clock, video=args.video,
                       products=args.products, testbench=bench, force=args.force)  # fmt: skip
    if args.json:
        print_json({"directory": str(r.directory), **r.meta})
        return 0
    if note:
        print(f"input {args.testbench}: {note}")
    print(r.summary())
    if not r.meta["estimate_fits_clock"]:
        print(
            f"note: the delay model's longest stage ({r.meta['estimated_stage_ns']} ns) is longer than the clock "
            f"period ({1000.0 / r.meta['clock_mhz']:.3f} ns)"
            + ("; a multiplication is one stage, try --products shift-add" if args.products == "multiply" else "")
        )
    for name in r.files:
        print(f"  {name}")
    return 0
