"""``fxnet lab [NOTEBOOK]``: open JupyterLab on the quick-start notebook, with the options this machine needs."""

from __future__ import annotations

import argparse
import importlib.util
import os
import subprocess
import sys

from ._common import CliError

#: the notebook ``fxnet lab`` opens when none is given (relative to the working directory)
DEFAULT_NOTEBOOK = os.path.join("notebooks", "01-quick-start.ipynb")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "lab",
        help="open JupyterLab on a notebook (the quick start by default)",
        description="Start JupyterLab on NOTEBOOK (default notebooks/01-quick-start.ipynb). As root "
        "(a container, a CI machine) JupyterLab refuses to start without --allow-root; this "
        "command adds it. Options after `--` go to JupyterLab unchanged.",
    )
    p.add_argument("items", nargs="*", metavar="NOTEBOOK [-- LAB_OPTION ...]",
                   help=f"notebook to open (default {DEFAULT_NOTEBOOK}), then JupyterLab options after --")  # fmt: skip
    p.add_argument("--port", type=int, default=None, help="port to listen on (default: 8888 or the next free)")
    p.add_argument("--no-browser", action="store_true", help="do not open a web browser")
    p.add_argument("--dry-run", action="store_true", help="print the command instead of running it")
    p.set_defaults(func=run)


def lab_command(notebook: str, *, port: int | None = None, no_browser: bool = False,
                extra: list[str] | None = None, as_root: bool | None = None) -> list[str]:
    """The ``jupyter lab`` command line that ``fxnet lab`` runs.

    >>> lab_command("nb.ipynb", port=9000, no_browser=True, as_root=True)[5:]
    ['nb.ipynb', '--allow-root', '--port=9000', '--no-browser']
    """
    if as_root is None:
        as_root = hasattr(os, "geteuid") and os.geteuid() == 0
    # the server's root is the working directory when the notebook lies under it (so the file
    # browser shows the project), else the notebook's own directory; the notebook opens by its path
    # relative to that root
    here = os.path.abspath(os.getcwd())
    full = os.path.abspath(notebook)
    root = here if os.path.commonpath([here, full]) == here else os.path.dirname(full)
    argv = [sys.executable, "-m", "jupyter", "lab", f"--ServerApp.root_dir={root}", os.path.relpath(full, root)]
    if as_root:
        argv.append("--allow-root")
    if port is not None:
        argv.append(f"--port={port}")
    if no_browser:
        argv.append("--no-browser")
    return argv + [a for a in (extra or []) if a != "--"]


def run(args: argparse.Namespace) -> int:
    notebooks = [a for a in args.items if not a.startswith("-")]
    lab_args = [a for a in args.items if a.startswith("-")]
    if len(notebooks) > 1:
        raise CliError(f"fxnet lab: one notebook at a time, not {len(notebooks)} ({', '.join(notebooks)})")
    nb = notebooks[0] if notebooks else DEFAULT_NOTEBOOK
    if not os.path.isfile(nb):
        hint = " (run it from the project's top directory, or name a notebook)" if nb == DEFAULT_NOTEBOOK else ""
        raise CliError(f"fxnet lab: {nb}: no such notebook{hint}")
    if args.port is not None and not 1 <= args.port <= 65535:
        raise CliError(f"fxnet lab: --port must be between 1 and 65535, not {args.port!r}")
    if importlib.util.find_spec("jupyterlab") is None:
        raise CliError("fxnet lab: JupyterLab is not installed (pip install -e '.[lab]')")
    argv = lab_command(nb, port=args.port, no_browser=args.no_browser, extra=lab_args)
    if args.dry_run:
        print(" ".join(argv))
        return 0
    try:
        return subprocess.call(argv)
    except KeyboardInterrupt:  # JupyterLab prints its own shutdown lines
        return 0
