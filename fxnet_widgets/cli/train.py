"""``fxnet train IMAGE MASK -o NETWORK.json [--hidden 3 --activation sigmoid --seed 0]``."""

from __future__ import annotations

import argparse
import os

from ..core.labels import load_labels
from ..core.training import HIDDEN_ACTIVATIONS, train
from ._common import CliError, check_output_path, print_json


def _hidden(text: str) -> tuple[int, ...]:
    try:
        sizes = tuple(int(t) for t in text.split(",") if t.strip())
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a unit count or a comma list like 4,3, not {text!r}") from None
    if not sizes or any(not 1 <= s <= 4096 for s in sizes):
        raise argparse.ArgumentTypeError(f"must be unit counts between 1 and 4096, not {text!r}")
    return sizes


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "train",
        help="train a pixel classifier from an image and its mask (or class map)",
        description="Train a small MLP on the pixels of IMAGE labelled by MASK "
        "(black = first class, white = second) or by a colour-coded class map with --table.",
    )
    p.add_argument("image", help="image file (RGB; other modes converted)")
    p.add_argument("mask", help="mask image (black/white), class map (with --table) or r,g,b,label CSV")
    p.add_argument("-o", "--output", required=True, help="network file to write (.json)")
    p.add_argument("--hidden", type=_hidden, default=(3,), help="hidden units, e.g. 3 or 4,3 (default 3)")
    p.add_argument("--activation", choices=HIDDEN_ACTIVATIONS, default="sigmoid", help="hidden activation")
    p.add_argument("--seed", type=int, default=0, help="seed of sampling and training (default 0)")
    p.add_argument("--samples", type=int, default=100_000, help="pixels drawn (default 100000)")
    p.add_argument("--classes", default=None, help="class names for a mask, e.g. other,ripe")
    p.add_argument("--table", default=None, help="classes.json colour table: MASK is a class map")
    p.add_argument("--json", action="store_true", help="print the training report as JSON")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    out = check_output_path(args.output, ".json")
    for path in (args.image, args.mask, args.table):
        if path is not None and not os.path.exists(path):
            raise CliError(f"fxnet: {path}: no such file")
    classes = None
    if args.classes is not None:
        classes = tuple(c.strip() for c in args.classes.split(","))
        if len(classes) < 2 or not all(classes):
            raise CliError(f"fxnet: --classes must name 2 or more classes, not {args.classes!r}")
    if args.seed < 0:
        raise CliError(f"fxnet: --seed must be a non-negative integer, not {args.seed}")
    pixels = load_labels(args.image, args.mask, table=args.table, classes=classes)
    result = train(
        pixels,
        hidden=args.hidden,
        activation=args.activation,
        seed=args.seed,
        n_samples=args.samples,
    )
    result.network.save(out)
    if args.json:
        print_json({"network": out, "classes": list(pixels.classes), **result.report.to_dict()})
    else:
        print(f"{args.mask}: {', '.join(f'{c} {n}' for c, n in pixels.counts().items())} pixels")
        print(result.report.summary())
        print(f"wrote {out}")
    return 0
