"""``fxnet footage NETWORK PLAN SOURCE -o OUT.json|.npz [--frames A:B:S] [--labels MASKS]
[--overlay OUT.mkv] [--json] [--quiet]``."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from ..core.analysis import text_progress
from ..core.footage import analyse_footage, open_footage
from ._common import CliError, check_output_path, load_network, load_plan, print_json


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "footage",
        help="analyse a video clip or image folder frame by frame (disagreement with float, events)",
        description="Decode SOURCE (a video file PyAV/FFmpeg reads, an image folder or a glob pattern) and "
        "run the fixed-point network under PLAN and the float network on every frame, as colour look-ups "
        "built once. Writes one record per decoded frame (fxnet.footage JSON, or per-frame arrays in .npz).",
    )
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument("source", help="video file, image folder or glob pattern (quote it)")
    p.add_argument("-o", "--output", required=True, help="result file (.json or .npz)")
    p.add_argument("--frames", default=None, metavar="A:B:S", help="frames A (included) to B (excluded), every S-th")
    p.add_argument("--labels", default=None, metavar="MASKS",
                   help="label masks, one per frame (video, image folder or glob): white = positive")
    p.add_argument("--overlay", default=None, metavar="OUT.mkv|OUT.mp4",
                   help="also write a video with the disagreement marked and the fixed mask outlined")
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="split the frames over N worker processes (default: this process)")
    p.add_argument("--dask", default=None, metavar="ADDRESS", help="split the frames over a dask scheduler")
    p.add_argument("--rate", type=float, default=None, help="frame rate of an image sequence (frames/s)")
    p.add_argument("--json", action="store_true", help="print the totals as one JSON object")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    out = check_output_path(args.output)
    if not out.endswith((".json", ".npz")):
        raise CliError(f"fxnet: {out}: the output file name must end in .json or .npz")
    if args.overlay is not None:
        check_output_path(args.overlay)
        if not args.overlay.endswith((".mkv", ".mp4")):
            raise CliError(f"fxnet: {args.overlay}: the overlay file name must end in .mkv or .mp4")
    clip = open_footage(args.source, args.frames, rate=args.rate)
    progress = None if args.quiet else text_progress(sys.stderr, label="frames")
    if args.workers is not None or args.dask is not None:
        result = _split(args, net, plan)
    else:
        labels = open_footage(args.labels, args.frames) if args.labels else None
        result = analyse_footage(net, plan, clip, progress=progress, labels=labels, overlay=args.overlay)
    result.save(out)
    t = result.timing
    n = len(result.frames)
    speed = {
        "decode_fps": n / t["decode_s"] if t.get("decode_s") else None,
        "analyse_fps": n / t["analyse_s"] if t.get("analyse_s") else None,
        "lookup_build_s": t["fixed_lookup_s"] + t["float_lookup_s"] if t else None,
    }
    if args.json:
        print_json({"source": result.source, "totals": result.totals, "timing": speed, "output": out})
    else:
        print(result.summary())
        print(f"  colour: {clip.info.colour}")
        fps = " ".join(f"{k} {v:.1f}" for k, v in speed.items() if v is not None)
        print(f"  timing (varies): {fps}")
        print(f"wrote {out}" + (f" and {args.overlay}" if args.overlay else ""))
    return 0


def _split(args: argparse.Namespace, net: Any, plan: Any) -> Any:
    from ..core.analysis.search import SerialExecutor, local_pool
    from ..core.footage.parallel import analyse_footage_split

    if args.labels or args.overlay:
        raise CliError("fxnet: --labels and --overlay run in this process: leave out --workers and --dask")
    if args.workers is not None and args.dask is not None:
        raise CliError("fxnet: give --workers or --dask, not both")
    progress = None if args.quiet else text_progress(sys.stderr, label="parts")
    if args.dask is not None:
        try:
            from dask.distributed import Client
        except ImportError:
            raise CliError("fxnet: --dask needs dask.distributed: pip install 'fxnet-widgets[dask]'") from None
        with Client(args.dask) as client:
            return analyse_footage_split(net, plan, args.source, client, frames=args.frames, progress=progress)
    if args.workers < 0:
        raise CliError(f"fxnet: --workers must be at least 0, not {args.workers}")
    ex = SerialExecutor() if args.workers == 0 else local_pool(args.workers)
    try:
        return analyse_footage_split(net, plan, args.source, ex, frames=args.frames, progress=progress)
    finally:
        ex.shutdown(wait=True)
