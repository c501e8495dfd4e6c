"""Hypothesis drawing of small random networks and plans in every mode (shared by the kernel tests)."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import Any

import pytest
from hypothesis import strategies as st

from fxnet_widgets.core.formats import ROUNDINGS


def draw_network_and_plan(draw: Any, max_bits: int = 10) -> tuple[dict, list[dict], int, int]:
    """A network document (1-3 layers, any activation) and its plan layers; also input bits and n_in."""
    n_layers = draw(st.integers(1, 3))
    bits = draw(st.integers(1, max_bits))
    n_in = draw(st.integers(1, 4))
    sizes = [n_in] + [draw(st.integers(1, 3)) for _ in range(n_layers)]
    weight = st.floats(-8, 8, allow_nan=False, allow_infinity=False, width=64)
    layers, plans = [], []
    for li in range(n_layers):
        act = draw(st.sampled_from(["sigmoid", "tanh", "relu", "identity"]))
        w = [[draw(weight) for _ in range(sizes[li])] for _ in range(sizes[li + 1])]
        b = [draw(st.floats(-4, 4, allow_nan=False, width=64)) for _ in range(sizes[li + 1])]
        layers.append({"weights": w, "bias": b, "activation": act})
        p = {
            "weight_bits": draw(st.integers(2, 12)),
            "weight_frac": draw(st.integers(-2, 8)),
            "weight_round": draw(st.sampled_from(ROUNDINGS)),
            "acc_bits": draw(st.integers(4, 24)),
            "acc_overflow": draw(st.sampled_from(["wrap", "saturate"])),
            "index_round": draw(st.sampled_from(ROUNDINGS)),
            "table_round": draw(st.sampled_from(ROUNDINGS)),
            "out_bits": draw(st.integers(2, 10)),
        }
        if act in ("sigmoid", "tanh"):
            p["table_bits"] = draw(st.integers(2, 10))
            p["table_frac"] = draw(st.integers(-2, 12))
            p["table_sample"] = draw(st.sampled_from(["edge", "mid"]))
        else:
            p["out_frac"] = draw(st.integers(-3, 10))
        plans.append(p)
    doc = {
        "input": {"bits": bits, "scale": draw(st.sampled_from(["pow2", "full"]))},
        "layers": layers,
        "output": {"threshold": draw(st.floats(-1, 1, width=64))},
    }
    return doc, plans, bits, n_in


@contextlib.contextmanager
def kernel_path(path: str) -> Iterator[None]:
    """Run the block on one kernel path: "numpy" (the reference) or "numba" (the compiled loops, at any size).

    The caches are keyed by value, not by path, so each block starts with them empty.
    """
    from fxnet_widgets.core import kernel
    from fxnet_widgets.core.kernel import _compiled

    kernel.clear_caches()
    with pytest.MonkeyPatch.context() as m:
        m.setenv("FXNET_KERNEL", path)
        if path != "numpy":
            m.setattr(_compiled, "MIN_SAMPLES", 0)
            _compiled.kernels()  # loaded: "compiled" (auto) then runs the loops even in a test run alone
        yield
