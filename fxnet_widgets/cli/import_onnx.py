"""``fxnet import MODEL.onnx -o NETWORK.json [--input-scale full|pow2|codes] [--input-bits N]``."""

from __future__ import annotations

import argparse

from ..core.imports import TRAINED_ON
from ..core.onnx_io import load_onnx
from ._common import check_output_path


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("import", help="read a fully connected ONNX model into a network file (fxnet.network JSON)")
    p.add_argument("model", help="ONNX model file (.onnx; external data next to it)")
    p.add_argument("-o", "--output", required=True, metavar="NETWORK", help="network file to write (.json)")
    p.add_argument(
        "--input-scale",
        choices=TRAINED_ON,
        default="pow2",
        help="what the model's input is: code/2**bits (pow2, default), code/(2**bits-1) (full) or raw codes",
    )
    p.add_argument("--input-bits", type=int, default=8, metavar="N", help="bits of the input codes (default 8)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    check_output_path(args.output, ".json")
    net = load_onnx(args.model, input_bits=args.input_bits, input_scale=args.input_scale)
    net.save(args.output)
    print(f"imported {args.model}: {net!r} -> {args.output}")
    return 0
