"""``fxnet publish NOTEBOOK.ipynb -o PAGE.html [--execute] [--offline DIR] [--no-input] [--timeout S]``."""

from __future__ import annotations

import argparse
import os

from ._common import CliError, check_output_path


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("publish", help="write a notebook as one HTML page whose widgets still render")
    p.add_argument("notebook", help="notebook file (.ipynb)")
    p.add_argument("-o", "--output", required=True, help="page file (.html)")
    p.add_argument("--execute", action="store_true",
                   help="run the notebook first in a clean kernel, storing widget state")  # fmt: skip
    p.add_argument(
        "--offline", metavar="DIR", default=None,
        help="inline every script (the page opens offline); DIR holds @jupyter-widgets/html-manager's "
        "dist/embed-amd.js (scripts/fetch_widget_bundles.sh gets it)",
    )  # fmt: skip
    p.add_argument("--no-input", action="store_true", help="leave out the code cells' input (outputs only)")
    p.add_argument("--timeout", type=int, default=600, help="seconds each cell may run with --execute (default 600)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..report.publish import publish_notebook, read_notebook

    if not os.path.isfile(args.notebook):
        raise CliError(f"fxnet publish: notebook must be an existing .ipynb file, not {args.notebook!r}")
    read_notebook(args.notebook)  # one-line error for an invalid notebook before any kernel starts
    out = check_output_path(args.output, ".html")
    if args.offline is not None and not os.path.isdir(args.offline):
        raise CliError(f"fxnet publish: --offline must be an existing directory, not {args.offline!r}")
    if args.timeout <= 0:
        raise CliError(f"fxnet publish: --timeout must be a positive number of seconds, not {args.timeout!r}")
    path = publish_notebook(args.notebook, out, execute=args.execute, offline_bundles=args.offline,
                            no_input=args.no_input, timeout=args.timeout)  # fmt: skip
    mode = "offline, every script inlined" if args.offline is not None else "scripts from public CDNs"
    print(f"wrote {path} ({os.path.getsize(path)} bytes; {mode})")
    return 0
