"""The cube picture's compiled painter against the numpy painter (the reference path).

Both write the same squares in the same order (painter's algorithm: nearer depth levels later),
so every pixel must be equal, on random grids of every size and disagreement density,
two classes and three, including small pictures where squares of one level overlap.
"""

from __future__ import annotations

import numpy as np
import pytest

from fxnet_widgets.render.cube import render_cube


@pytest.mark.parametrize("seed", range(6))
def test_compiled_painter_draws_the_numpy_painters_pixels(monkeypatch: pytest.MonkeyPatch, seed: int):
    rng = np.random.default_rng(seed)
    for _ in range(12):
        n = int(rng.choice([2, 3, 8, 16, 32]))
        size = int(rng.choice([64, 100, 256]))
        k = int(rng.choice([2, 3]))
        fx = rng.integers(0, k, (n, n, n))
        fl = fx.copy()
        flip = rng.random((n, n, n)) < rng.choice([0.002, 0.05, 0.5, 1.0])
        fl[flip] = rng.integers(0, k, int(flip.sum()))
        monkeypatch.setenv("FXNET_KERNEL", "numpy")
        ref = render_cube(fx, fl, size, k)
        monkeypatch.setenv("FXNET_KERNEL", "numba")
        got = render_cube(fx, fl, size, k)
        assert np.array_equal(ref, got), (n, size, k, int((ref != got).any(axis=2).sum()))
        # the painting did something where they differ (else the comparison proves little)
        if (fx != fl).any():
            assert (ref != render_cube(fx, fx, size, k)).any()
