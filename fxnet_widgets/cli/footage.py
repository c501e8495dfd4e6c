"""``fxnet footage NETWORK PLAN SOURCE -o OUT.json|.npz [--frames A:B:S] [--labels MASKS]
[--overlay OUT.mkv] [--json] [--quiet]``."""

from __future__ import annotations

import argparse
import sys

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
    labels = open_footage(args.labels, args.frames) if args.labels else None
    result = analyse_footage(net, plan, clip, progress=progress, labels=labels, overlay=args.overlay)
    result.save(out)
    t = result.timing
    n = len(result.frames)
    speed = {
        "decode_fps": n / t["decode_s"] if t["decode_s"] > 0 else None,
        "analyse_fps": n / t["analyse_s"] if t["analyse_s"] > 0 else None,
        "lookup_build_s": t["fixed_lookup_s"] + t["float_lookup_s"],
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
