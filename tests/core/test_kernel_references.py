"""The kernel bit for bit against two outside fixed-point libraries, fxpmath and apytypes.

Both libraries compute the products, the sum, the accumulator wrap and the floor-rounded,
saturated table index in their own fixed-point types (``tests/_support/fxlibs.py``); the
codes they read from the table must equal the kernel's on every sample. Skipped when a
library is not installed (both are in the ``test`` extra).
"""

from __future__ import annotations

import numpy as np
import pytest
from fxhand import hand_network
from fxlibs import with_apytypes, with_fxpmath

import fxnet_widgets as fw
from fxnet_widgets.core import kernel

#: the benchmark's plan (bench_kernel.py), a narrow accumulator that wraps, and a coarse table
PLANS = [
    dict(weight_bits=8, weight_frac=5, acc_bits=18, table_bits=14, table_frac=9, out_bits=8),
    dict(weight_bits=8, weight_frac=5, acc_bits=12, table_bits=10, table_frac=6, out_bits=8),
    dict(weight_bits=6, weight_frac=3, acc_bits=14, table_bits=8, table_frac=4, out_bits=7),
]


def _cases():
    net = hand_network(classes=["other", "ripe"])
    codes = np.random.default_rng(12).integers(0, 256, (3000, 3))
    for fields in PLANS:
        yield net, fw.Plan.uniform(net, **fields), codes


@pytest.mark.parametrize("library", ["fxpmath", "apytypes"])
def test_kernel_equals_outside_fixed_point_library(library):
    pytest.importorskip(library)
    run = with_fxpmath if library == "fxpmath" else with_apytypes
    overflowed = 0
    for net, plan, codes in _cases():
        r = fw.emulate(net, plan, codes)
        overflowed += int(r.event_totals()["acc_overflow"])
        got = run(kernel.build_integer_network(net, plan), codes)[:, 0]
        np.testing.assert_array_equal(got, r.out_codes[:, 0], err_msg=f"{library} on {plan!r}")
    assert overflowed > 0  # the narrow plan exercises the accumulator wrap
