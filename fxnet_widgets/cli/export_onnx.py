"""``fxnet export-onnx NETWORK.json -o MODEL.onnx [--float64]``."""

from __future__ import annotations

import argparse

from ..core.onnx_io import save_onnx
from ._common import check_output_path, load_network


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("export-onnx", help="write the float network as a standard ONNX model (Gemm + activations)")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("-o", "--output", required=True, metavar="MODEL", help="ONNX file to write (.onnx)")
    p.add_argument("--float64", action="store_true", help="double tensors instead of float32")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    check_output_path(args.output, ".onnx")
    net = load_network(args.network)
    save_onnx(net, args.output, dtype="float64" if args.float64 else "float32")
    print(f"wrote {args.output}: {net!r}, input 'input' = codes * {net.input_factor()!r}")
    return 0
