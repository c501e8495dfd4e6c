"""Shared pieces of the subcommands: loading inputs, reporting errors."""

from __future__ import annotations

import json
import os
import sys
from collections.abc import Callable
from typing import Any

import numpy as np

from ..core.inputs import load_codes
from ..core.network import Network
from ..core.plan import Plan

IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".bmp", ".gif", ".tif", ".tiff", ".webp", ".ppm", ".pgm", ".pnm")


class CliError(Exception):
    """A one-line error for stderr (exit code 2)."""


def one_line(text: str) -> str:
    """``text`` as one line: line breaks inside it (from a file name or argument) are shown escaped."""
    return text.strip().replace("\r", "\\r").replace("\n", "\\n")


def run_guarded(go: Callable[[], int]) -> int:
    """Run ``go``; bad input becomes one line on stderr and exit code 2."""
    try:
        return go()
    except CliError as exc:
        print(one_line(str(exc)), file=sys.stderr)
        return 2
    except (TypeError, ValueError, OSError, KeyError) as exc:
        print(f"fxnet: {one_line(str(exc)) or type(exc).__name__}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("fxnet: interrupted", file=sys.stderr)
        return 130
    except SystemExit as exc:  # argparse --help / --version
        return int(exc.code or 0)


def load_network(path: str) -> Network:
    return Network.load(path)


def load_plan(path: str, network: Network) -> Plan:
    return Plan.load(path, network)


def load_input(path: str, network: Network) -> tuple[np.ndarray, str]:
    """Codes from an image file or a ``.npy`` of codes; returns ``(codes, note)``.

    Images come back H x W x 3 (uint8); ``.npy`` N x n_in. Errors name the file
    (:func:`fxnet_widgets.core.inputs.load_codes`, the loader export uses too).
    """
    got = load_codes(path, network)  # bad input raises with the file named; run_guarded prints "fxnet: ..."
    return got.codes, got.note


def print_json(obj: Any) -> None:
    print(json.dumps(obj, allow_nan=False, sort_keys=False))


def check_output_path(path: str, suffix: str | None = None) -> str:
    parent = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(parent):
        raise CliError(f"fxnet: {path}: the directory {parent} does not exist")
    if suffix and not path.endswith(suffix):
        raise CliError(f"fxnet: {path}: the output file name must end in {suffix}")
    return path
