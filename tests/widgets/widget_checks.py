"""Independent checks of what the views hold against the kernel (shared by the widget tests)."""

from __future__ import annotations

import io

import numpy as np
from PIL import Image

from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.render.palette import FIXED_ONLY, FLOAT_ONLY, class_colours


def decode_classes(png: bytes, n_classes: int) -> np.ndarray:
    """Class index of every pixel of a decision-mask PNG (by its colour)."""
    rgb = np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).astype(np.int64)
    pal = class_colours(n_classes).astype(np.int64)
    hit = (rgb[:, :, None, :] == pal[None, None, :, :]).all(axis=-1)
    assert hit.any(axis=-1).all(), "a mask pixel has no class colour"
    return hit.argmax(axis=-1)


def decode_rgb(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))


def slice_input(codes: np.ndarray, x_input: int, y_input: int, fixed_input: int, position: int) -> np.ndarray:
    """The slice grid built here, independently: pixel [iy, ix] = inputs (codes[ix], codes[iy], position)."""
    n = codes.size
    grid = np.zeros((n, n, 3), dtype=np.uint8)
    for iy in range(n):
        grid[iy, :, x_input] = codes
        grid[iy, :, y_input] = codes[iy]
    grid[:, :, fixed_input] = position
    return grid


def assert_explorer_matches_kernel(ex, image_codes: np.ndarray | None = None) -> None:
    """Every view of an explorer shows exactly what the kernel computes for ``ex.plan``.

    "Float" is the float pass of the session's reference network (the original one, also while a
    refined network is swapped in); the fixed-point side is the session network's.
    """
    s = ex.session
    net, plan = s.network, s.plan
    ref = s.data.reference
    assert s.result.plan == plan
    n_cls = len(net.classes)
    emus = []
    if s.image is not None:
        codes = s.result.image.codes if image_codes is None else image_codes
        emu = emulate(net, plan, codes)
        emus.append(emu)
        fl = emulate(ref, plan, codes).float_decisions
        p = ex.preview
        assert np.array_equal(decode_classes(p.fixed_image.value, n_cls), emu.decisions)
        assert np.array_equal(decode_classes(p.float_image.value, n_cls), fl)
        over = decode_rgb(p.overlay_image.value)
        magenta = (over == np.array(FIXED_ONLY, np.uint8)).all(axis=-1)
        teal = (over == np.array(FLOAT_ONLY, np.uint8)).all(axis=-1)
        assert np.array_equal(magenta, (emu.decisions == 1) & (fl == 0))
        assert np.array_equal(teal, (emu.decisions == 0) & (fl == 1))
        assert np.array_equal(decode_rgb(p.input_image.value), codes)
    if s.samples is not None:
        emus.append(emulate(net, plan, s.samples))
    for sp in ex.boundary.slices:
        xi, yi, fi = ((0, 1, 2), (0, 2, 1), (1, 2, 0))[sp.which]
        pos = s.slice_positions[fi]
        c = np.arange(0, 256, 2)
        grid = slice_input(c, xi, yi, fi, pos)
        fx, fl = emulate(net, plan, grid).decisions, emulate(ref, plan, grid).float_decisions
        # comparison codes (render.comparison_codes): 0/1 agree, 2 only fixed says 1, 3 only float says 1
        want = np.where(fx == fl, fx, np.where(fx > fl, 2, 3))
        assert np.array_equal(sp.heatmap.color, want.astype(np.float32))
        assert sp.heatmap.color.dtype == np.float32
        assert np.array_equal(sp.heatmap.x, c.astype(np.float32))
    # event bars: the kernel's counts on the data, summed over image and samples, under honest names
    # (semantics.md: relu's low clamp is its zero, its high clamp and identity's ends clamp the output)
    counts = ex.events.counts
    rows = {k: i for i, k in enumerate(ex.events.shown)}
    col = 0
    for li, L in enumerate(net.layers):
        for j in range(L.n_out):
            low, high, ov = (sum(int(m.events[li][ev][j]) for m in emus) for ev in ("table_low", "table_high",
                                                                                   "acc_overflow"))  # fmt: skip
            assert counts[rows["acc_overflow"], col] == ov
            if L.activation in ("sigmoid", "tanh"):
                assert (counts[rows["table_low"], col], counts[rows["table_high"], col]) == (low, high)
            elif L.activation == "relu":
                assert (counts[rows["off"], col], counts[rows["output_clamp"], col]) == (low, high)
            else:
                assert counts[rows["output_clamp"], col] == low + high
            assert counts[rows["weight_clip"], col] == int(emus[0].events[li]["weight_clip"][j])
            col += 1
    # histograms: every sample counted once per neuron
    total = sum(m.n for m in emus)
    for hp in ex.histograms.plots:
        assert int(hp.neuron.counts.sum()) == total


def refuse_out_bits_4(monkeypatch) -> None:
    """Make the views' kernel refuse any plan whose layer 1 has 4 output bits (a one-line error)."""
    import fxnet_widgets.widgets.parts as parts_module

    real = parts_module.emulate

    def refusing(net, plan, codes):
        if plan.layers[0].out_bits == 4:
            raise ValueError("layers[0]: refused for the test")
        return real(net, plan, codes)

    monkeypatch.setattr(parts_module, "emulate", refusing)
