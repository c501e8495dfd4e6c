"""``fxnet report NETWORK PLAN INPUT -o report.html [--offline DIR] [--mask MASK] [--title TEXT]``."""

from __future__ import annotations

import argparse
import os

from ._common import CliError, check_output_path, load_input, load_network, load_plan


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "report", help="write one HTML report: static tables and pictures, plus the widgets with their state"
    )
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("plan", help="plan file (fxnet.plan JSON)")
    p.add_argument("input", help="image file (RGB) or .npy of unsigned codes, N x n_in")
    p.add_argument("-o", "--output", required=True, help="report file (.html)")
    p.add_argument(
        "--offline", metavar="DIR", default=None,
        help="inline every script (one file that opens offline); DIR holds @jupyter-widgets/html-manager's "
        "dist/embed-amd.js (scripts/fetch_widget_bundles.sh gets it)",
    )  # fmt: skip
    p.add_argument("--mask", metavar="MASK", default=None,
                   help="black/white mask of the image (white = the second class): accuracy and confusion")  # fmt: skip
    p.add_argument("--title", default=None, help="page title")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..report import save_report
    from ..widgets.explorer import Explorer

    net = load_network(args.network)
    plan = load_plan(args.plan, net)
    codes, note = load_input(args.input, net)
    out = check_output_path(args.output, ".html")
    if args.offline is not None and not os.path.isdir(args.offline):
        raise CliError(f"fxnet report: --offline must be an existing directory, not {args.offline!r}")
    options: dict[str, object] = {}
    if codes.ndim == 3:
        options["image"] = codes
        if args.mask is not None:
            from ..core.labels import labels_from_mask

            if len(net.classes) != 2:
                raise CliError(f"fxnet report: --mask needs a network with 2 classes, not {len(net.classes)}")
            if not os.path.exists(args.mask):
                raise CliError(f"fxnet: {args.mask}: no such file")
            pixels = labels_from_mask(codes, args.mask, classes=tuple(net.classes))
            options["image_labels"] = pixels.labels.reshape(codes.shape[:2])
    else:
        if args.mask is not None:
            raise CliError("fxnet report: --mask needs an image input, not a .npy of codes")
        options["samples"] = codes
    explorer = Explorer(net, plan=plan, **options)
    path = save_report(explorer.session, out, widget=explorer, summary=explorer.summary(),
                       offline_bundles=args.offline, title=args.title)  # fmt: skip
    if note:
        print(f"input {args.input}: {note}")
    print(explorer.summary())
    mode = "offline, every script inlined" if args.offline is not None else "scripts from public CDNs"
    print(f"wrote {path} ({os.path.getsize(path)} bytes; {mode})")
    return 0
