"""The ``fxnet`` command line: thin subcommands over the core.

Each subcommand lives in its own module of this package and provides
``register(subparsers)``; the module names are listed in :data:`SUBCOMMANDS`.
Bad input ends with exit code 2 and one line on stderr naming the file and the
problem, never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from ..core.version import VERSION
from ._common import CliError, run_guarded

__all__ = ["main", "SUBCOMMANDS"]

#: subcommand modules, in the order ``fxnet --help`` lists them (one line each)
SUBCOMMANDS = [
    "emulate",
    "export",
    "datapath",
    "import_onnx",
    "export_onnx",
    "cost",
    "synth",
    "sweep",
    "tune",
    "refine",
    "train",
    "demo",
    "report",
    "lab",
    "publish",
    "footage",
]


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line, exit 2
        raise CliError(f"{self.prog}: {message}")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="fxnet", description="Fixed-point design of small neural networks, with evidence.")
    parser.add_argument("--version", action="version", version=f"fxnet-widgets {VERSION}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in SUBCOMMANDS:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of ``fxnet``; returns the exit code."""
    def go() -> int:
        parser = build_parser()
        args = parser.parse_args(list(sys.argv[1:] if argv is None else argv))
        if not getattr(args, "func", None):
            raise CliError(f"fxnet: a command is required (one of {', '.join(SUBCOMMANDS)}); see fxnet --help")
        return int(args.func(args) or 0)

    return run_guarded(go)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
