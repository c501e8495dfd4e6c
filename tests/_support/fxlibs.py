"""The kernel's arithmetic written with two outside fixed-point libraries, fxpmath and apytypes.

For a network of sigmoid/tanh layers with 8-bit inputs, ``acc_overflow = wrap``,
``index_round = floor`` and the table index saturated (the plan's defaults): each
library does the products, the sum, the accumulator wrap and the index shift in its own
fixed-point types (fxpmath docs: ``Fxp(..., overflow="wrap")``, ``rounding="floor"``;
apytypes docs: ``APyFixedArray.cast`` with ``OverflowMode.WRAP``/``SAT`` and
``QuantizationMode.TO_NEG``), and reads the kernel's table at the resulting index.
Used by tests/core/test_kernel_references.py and benchmarks/bench_kernel.py.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from fxnet_widgets.core.kernel import IntegerNetwork


def with_fxpmath(q: IntegerNetwork, codes: np.ndarray) -> np.ndarray:
    from fxpmath import Fxp

    u = Fxp(codes / 256.0, signed=True, n_word=10, n_frac=8)
    for L in q.layers:
        p = L.plan
        fw_ = p.weight_frac
        out = []
        for j in range(L.n_out):
            acc = Fxp(np.full(codes.shape[0], L.q_b[j] / 2.0 ** L.acc_frac), signed=True, n_word=40, n_frac=L.acc_frac)
            for i in range(L.n_in):
                w = Fxp(L.q_w[j, i] / 2.0**fw_, signed=True, n_word=p.weight_bits, n_frac=fw_)
                col = Fxp(u[:, i] if u.ndim == 2 else u, signed=True, n_word=20, n_frac=L.in_frac)
                acc = Fxp(acc + col * w, signed=True, n_word=40, n_frac=L.acc_frac)
            acc = Fxp(acc, signed=True, n_word=p.acc_bits, n_frac=L.acc_frac, overflow="wrap")
            idx = Fxp(acc, signed=True, n_word=p.table_bits, n_frac=p.table_frac, rounding="floor", overflow="saturate")
            out.append(L.table[np.asarray(idx.val, dtype=np.int64) - L.index_min])
        codes_l = np.stack(out, axis=1)
        u = codes_l / 2.0**L.out_frac
    return codes_l


def with_apytypes(q: IntegerNetwork, codes: np.ndarray) -> np.ndarray:
    import apytypes as apy

    x = apy.APyFixedArray.from_float(codes / 256.0, int_bits=2, frac_bits=8)
    for L in q.layers:
        p = L.plan
        w = apy.APyFixedArray.from_float(L.q_w.T / 2.0**p.weight_frac, int_bits=p.weight_bits - p.weight_frac,
                                         frac_bits=p.weight_frac)  # fmt: skip
        y = x @ w
        b = apy.APyFixedArray.from_float(np.broadcast_to(L.q_b / 2.0**L.acc_frac, (codes.shape[0], L.n_out)),
                                         int_bits=y.int_bits, frac_bits=y.frac_bits)  # fmt: skip
        z = (y + b).cast(int_bits=p.acc_bits - L.acc_frac, frac_bits=L.acc_frac, overflow=apy.OverflowMode.WRAP,
                         quantization=apy.QuantizationMode.TO_NEG)  # fmt: skip
        a = z.cast(int_bits=p.table_bits - p.table_frac, frac_bits=p.table_frac,
                   quantization=apy.QuantizationMode.TO_NEG, overflow=apy.OverflowMode.SAT)  # fmt: skip
        idx = np.rint(np.asarray(a.to_numpy()) * 2.0**p.table_frac).astype(np.int64)
        out = L.table[idx - L.index_min]
        x = apy.APyFixedArray.from_float(out / 2.0**L.out_frac, int_bits=2, frac_bits=L.out_frac)
    return out
