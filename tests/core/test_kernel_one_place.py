"""Wrap and saturate are written once, in ``formats``, and the kernel calls them.

A deliberately wrong ``formats.wrap`` (or ``formats.saturate``) must make the kernel's
comparison with the slow reference (``tests/_support/fxref.py``, written from the
contract) fail: proof that the kernel has no private copy of either.
"""

from __future__ import annotations

import fxref
import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core import formats, kernel


def _case(overflow: str):
    net = fw.Network.from_layers([([[3.0, 2.5, -1.0]], [0.5], "identity")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=10, acc_overflow=overflow,
                           out_bits=12, out_frac=12)  # fmt: skip
    codes = np.random.default_rng(5).integers(0, 256, (6000, 3))  # above the look-up path's threshold
    return net, plan, codes


def _kernel_matches_reference(net, plan, codes) -> bool:
    kernel.clear_caches()
    r = fw.emulate(net, plan, codes)
    ref = fxref.run(net.to_dict(), plan.to_dict(), codes[:400].tolist())["layers"][0]
    return r.acc[0][:400].tolist() == ref["acc"] and r.codes[0][:400].tolist() == ref["codes"]


_REAL_SATURATE = formats.saturate


def _wrong(s, width):
    # a clamp one LSB high: plausible, and wrong
    return _REAL_SATURATE(s, width) + 1


@pytest.mark.parametrize(("overflow", "name"), [("wrap", "wrap"), ("saturate", "saturate")])
def test_a_wrong_formats_function_fails_the_kernel_check(monkeypatch, overflow, name):
    net, plan, codes = _case(overflow)
    assert fw.emulate(net, plan, codes).event_totals()["acc_overflow"] > 0  # the accumulator does overflow
    assert _kernel_matches_reference(net, plan, codes)
    monkeypatch.setattr(formats, name, _wrong)
    assert not _kernel_matches_reference(net, plan, codes)
    monkeypatch.undo()
    assert _kernel_matches_reference(net, plan, codes)
    kernel.clear_caches()
