"""``fxnet synth NETWORK PLAN --target ice40-up5k [--clock MHZ | --video 1280x720p60] [--json]``.

Also ``fxnet synth --design DIR [--top NAME]`` for any directory of Verilog files
(for example one written by ``fxnet datapath``).
"""

from __future__ import annotations

import argparse
import sys

from ..core.analysis.video import VIDEO_FORMATS
from ..core.synth import TARGETS, SynthesisCancelled, ToolError, synthesize
from ._common import CliError, load_network, load_plan, one_line, print_json


def _video(text: str) -> str:
    """A video format by its full name, or by its unique ending (``720p60`` for ``1280x720p60``)."""
    if text in VIDEO_FORMATS:
        return text
    matches = [name for name in VIDEO_FORMATS if name.endswith("x" + text)]
    if len(matches) != 1:
        raise CliError(f"fxnet synth: --video must be one of {', '.join(VIDEO_FORMATS)}, not {text!r}")
    return matches[0]


def _number(text: str, what: str, lo: float, hi: float) -> float:
    try:
        v = float(text)
    except ValueError:
        v = float("nan")
    if not lo < v < hi:
        raise CliError(f"fxnet synth: {what} must be a number between {lo:g} and {hi:g}, not {text!r}")
    return v


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("synth", help="synthesize with Yosys (and place and route with nextpnr-ice40): LUTs, fmax")
    p.add_argument("network", nargs="?", help="network file (fxnet.network JSON)")
    p.add_argument("plan", nargs="?", help="plan file (fxnet.plan JSON)")
    p.add_argument("--design", metavar="DIR", help="synthesize this directory of Verilog files instead")
    p.add_argument("--top", default="fxnet_datapath", help="top module (default fxnet_datapath)")
    p.add_argument("--target", "--device", dest="target", default="ice40-up5k",
                   help=f"one of {', '.join(TARGETS)} (default ice40-up5k)")  # fmt: skip
    p.add_argument("--clock", "--freq", dest="clock", metavar="MHZ", help="clock to meet, in MHz")
    p.add_argument("--video", metavar="FORMAT",
                   help=f"clock to meet: a video format's pixel clock ({', '.join(VIDEO_FORMATS)})")  # fmt: skip
    p.add_argument("--pipeline", metavar="auto|N", help="pipeline of the generated datapath (default auto)")
    p.add_argument("--products", choices=("shift-add", "multiply"), default="shift-add",
                   help="constant products of the generated datapath (default shift-add)")  # fmt: skip
    p.add_argument("--seed", default="1", help="placement seed of nextpnr (default 1)")
    p.add_argument("--timeout", default="600", metavar="S", help="seconds each tool may run (default 600)")
    p.add_argument("--no-cache", action="store_true", help="synthesize even when a cached result exists")
    p.add_argument("--progress", action="store_true", help="print each stage on stderr")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if args.target not in TARGETS:
        raise CliError(f"fxnet synth: --target must be one of {', '.join(TARGETS)}, not {args.target!r}")
    if args.clock is not None and args.video is not None:
        raise CliError("fxnet synth: give --clock or --video, not both")
    clock = None if args.clock is None else _number(args.clock, "--clock", 0, 10_000)
    video = None if args.video is None else _video(args.video)
    seed = int(args.seed) if args.seed.isascii() and args.seed.isdigit() else None
    if seed is None or seed >= 2**31:
        raise CliError(f"fxnet synth: --seed must be a whole number between 0 and 2147483647, not {args.seed!r}")
    timeout = _number(args.timeout, "--timeout", 0, 86_400)
    pipeline: int | str | None = None
    if args.pipeline is not None:
        if args.pipeline != "auto" and not args.pipeline.isdigit():
            raise CliError(f"fxnet synth: --pipeline must be auto or a whole number, not {args.pipeline!r}")
        pipeline = "auto" if args.pipeline == "auto" else int(args.pipeline)
    if args.design is not None:
        if args.network is not None:
            raise CliError("fxnet synth: give NETWORK PLAN or --design DIR, not both")
        source, plan = args.design, None
    else:
        if args.network is None or args.plan is None:
            raise CliError("fxnet synth: NETWORK and PLAN are required (or --design DIR)")
        source = load_network(args.network)
        plan = load_plan(args.plan, source)

    def progress(fraction: float, message: str) -> None:
        print(f"fxnet synth: {100 * fraction:3.0f} % {message}", file=sys.stderr, flush=True)

    try:
        result = synthesize(
            source, plan, target=args.target, top=args.top, clock_mhz=clock, video=video, pipeline=pipeline,
            products=args.products,
            seed=seed, timeout=timeout, cache=not args.no_cache, progress=progress if args.progress else None,
        )  # fmt: skip
    except (ToolError, SynthesisCancelled) as exc:
        raise CliError("fxnet synth: " + one_line(" | ".join(ln.strip() for ln in str(exc).splitlines()))) from None
    if args.json:
        doc = result.to_dict()
        doc["cached"] = result.cached
        print_json(doc)
    else:
        print(result.summary())
    return 0
