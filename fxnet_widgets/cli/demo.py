"""``fxnet demo -o DIR``: the demo scenario's scenes, masks, network and plan."""

from __future__ import annotations

import argparse
import os

from ..core.demo import CLASS_MAP_FILES, DEMO_CLIP, DEMO_FILES, write_demo
from ._common import CliError, print_json


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "demo",
        help="write the demo scenario (produce belt scenes, masks, network, plan, belt clip)",
        description="Render the demo's training and test scenes of a produce-sorting belt, "
        "train the demo network on the training scene, derive a plan and measure both "
        f"on the test scene. Writes {', '.join(DEMO_FILES)} and {DEMO_CLIP} (a generated 40-frame "
        "belt clip: moving fruit, lighting drift, glare; FFV1 lossless, the same bytes each time) into DIR.",
    )
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="directory to write into")
    p.add_argument("--class-maps", action="store_true", help="also write the class maps and classes.json")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    d = args.output
    if os.path.exists(d) and not os.path.isdir(d):
        raise CliError(f"fxnet: {d}: exists and is not a directory")
    if not os.path.exists(d):
        parent = os.path.dirname(os.path.abspath(d))
        if not os.path.isdir(parent):
            raise CliError(f"fxnet: {d}: the directory {parent} does not exist")
        os.mkdir(d)
    demo = write_demo(d, class_maps=args.class_maps, clip=True)
    files = [*DEMO_FILES, DEMO_CLIP] + (
        list(CLASS_MAP_FILES) if args.class_maps else []
    )
    if args.json:
        print_json({"directory": d, "files": files, **demo.summary_dict()})
    else:
        print(demo.summary())
        print(f"wrote {', '.join(files)} in {d}")
    return 0
