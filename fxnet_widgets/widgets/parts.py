"""The parts of a session result, each computed from the data and one plan (pure functions).

Image, samples, slices and cube run the kernel (:func:`~fxnet_widgets.core.kernel.emulate`,
which caches by value); :func:`data_figures` turns one data set's emulation into
its figures (error metrics, the float-versus-fixed agreement matrix, argmax ties).
"Float" is always the float pass of the data's reference network (the original,
trained one) even while the integers come from another (a refined network swapped
in): the kernel's ``Emulation.against`` gives each part's emulation that float side.
"""

from __future__ import annotations

import weakref
from collections import OrderedDict
from itertools import combinations

import numpy as np

from ..core.analysis.metrics import error_metrics, pair_counts
from ..core.kernel import Emulation, _compiled, emulate
from ..core.kernel.caches import LRU
from ..core.kernel.evaluate import Prepared, prepare
from ..core.plan import Plan
from ..render.raster import DownscaledImage
from .data import SessionData
from .results import SLICES, CubeResult, DataFigures, ImageResult, SampleResult, SliceResult

__all__ = ["image_part", "samples_part", "slices_part", "cube_part", "data_figures", "argmax_ties"]


_PREPARED: OrderedDict[tuple[int, int, int], tuple[weakref.ref, Prepared]] = OrderedDict()


def _prepared(codes: np.ndarray, bits: int, n_in: int) -> np.ndarray | Prepared:
    """The kernel's decomposition of a read-only array that owns its memory, hashed once per array.

    Such an array's values cannot change behind its identity (as in :class:`.binning.BinCounter`),
    so every refresh of a session reuses the decomposition instead of hashing the frame again;
    any other array is handed to the kernel as it is (hashed there, by value).
    """
    if codes.flags.writeable or codes.base is not None:
        return codes
    key = (id(codes), bits, n_in)
    hit = _PREPARED.get(key)
    if hit is not None and hit[0]() is codes:
        _PREPARED.move_to_end(key)
        return hit[1]
    prep = prepare(codes, bits, n_in)
    _PREPARED[key] = (weakref.ref(codes), prep)
    while len(_PREPARED) > 4:
        _PREPARED.popitem(last=False)
    return prep


def _emulate(data: SessionData, plan: Plan, codes: np.ndarray | Prepared) -> Emulation:
    return emulate(data.network, plan, codes).against(data.reference)


def image_part(data: SessionData, plan: Plan, full_resolution: bool) -> ImageResult:
    assert data.image is not None and data.preview is not None
    if full_resolution or not data.preview.downscaled:
        codes, factor = data.image, 1
    else:
        codes, factor = data.preview.codes, data.preview.factor
    net = data.network
    _compiled.load_for(codes.shape[0] * codes.shape[1])  # every control change re-runs the image: worth the import
    emu = _emulate(data, plan, _prepared(codes, net.input_bits, net.n_in))
    h, w = data.image.shape[:2]
    note = DownscaledImage(codes, factor, (h, w)).note
    labels = None
    if data.image_labels is not None:
        labels = data.image_labels if factor == 1 else data.image_labels[::factor, ::factor]
    return ImageResult(codes, emu.decisions, emu.float_decisions, factor, (h, w), note, emu, labels)


def samples_part(data: SessionData, plan: Plan) -> SampleResult:
    assert data.samples is not None
    net = data.network
    emu = _emulate(data, plan, _prepared(data.samples, net.input_bits, net.n_in))
    return SampleResult(data.samples, data.labels, emu.decisions, emu.float_decisions, emu)


#: the slices' input codes by (grid codes, position, input bits, inputs), decomposed for the kernel
_SLICE_INPUTS = LRU(4)


def _slice_inputs(c: np.ndarray, pos: tuple[int, int, int], bits: int, n_in: int) -> Prepared:
    """The three slices' input codes, stacked (3n x n x 3) and decomposed, once per position.

    A plan change keeps the position, so the kernel's decomposition of the stack is reused
    instead of building, hashing and splitting the stack again.
    """

    def make() -> Prepared:
        n = c.size
        stack = np.empty((3 * n, n, 3), dtype=np.uint8 if bits <= 8 else np.uint16)
        for si, (_, xi, yi, fi) in enumerate(SLICES):
            block = stack[si * n : (si + 1) * n]
            block[..., xi] = c[None, :]
            block[..., yi] = c[:, None]
            block[..., fi] = pos[fi]
        return prepare(stack, bits, n_in)

    return _SLICE_INPUTS.get((c.tobytes(), pos, bits, n_in), make)


def slices_part(data: SessionData, plan: Plan, pos: tuple[int, int, int],
                sample_decisions: np.ndarray | None) -> tuple[SliceResult, ...]:  # fmt: skip
    """The three slices at ``pos``; without labels the samples are coloured by ``sample_decisions``."""
    c = data.slice_codes
    n = c.size
    net = data.network
    emu = _emulate(data, plan, _slice_inputs(c, tuple(int(v) for v in pos), net.input_bits, net.n_in))
    fx, fl = emu.decisions, emu.float_decisions
    tol = max(1, int(c[1] - c[0]) * 4) if n > 1 else 1
    out = []
    for si, (name, xi, yi, fi) in enumerate(SLICES):
        if data.samples is not None:
            near = np.abs(data.samples[:, fi].astype(np.int64) - pos[fi]) <= tol
            px = data.samples[near, xi].astype(np.int64)
            py = data.samples[near, yi].astype(np.int64)
            cls = data.labels if data.labels is not None else sample_decisions
            assert cls is not None
            pc = cls[near]
        else:
            px = py = pc = np.zeros(0, dtype=np.int64)
        out.append(
            SliceResult(name, xi, yi, fi, int(pos[fi]), c, c, fx[si * n : (si + 1) * n], fl[si * n : (si + 1) * n],
                        px, py, np.asarray(pc, dtype=np.int64), tol)
        )  # fmt: skip
    return tuple(out)


def cube_part(data: SessionData, plan: Plan) -> CubeResult:
    assert data.cube_input is not None
    net = data.network
    emu = _emulate(data, plan, _prepared(data.cube_input, net.input_bits, net.n_in))
    n = data.cube_codes.size
    return CubeResult(data.cube_codes, emu.decisions.reshape(n, n, n), emu.float_decisions.reshape(n, n, n))


def argmax_ties(out_codes: np.ndarray) -> dict[tuple[int, int], int]:
    """Per class pair ``(i, j)``, ``i < j``: decisions where outputs i and j both hold the largest code.

    There the argmax takes the lower index (the contract's rule), so fixed point
    silently prefers class ``i``. One output (a threshold) has no ties: ``{}``.

    >>> argmax_ties(np.array([[3, 3, 1], [2, 5, 5], [4, 4, 4], [1, 0, 0]]))
    {(0, 1): 2, (0, 2): 1, (1, 2): 2}
    """
    codes = np.asarray(out_codes).reshape(-1, np.shape(out_codes)[-1])
    n_out = codes.shape[1]
    if n_out < 2:
        return {}
    top = codes == codes.max(axis=1, keepdims=True)
    tied = top[top.sum(axis=1) > 1]
    return {(i, j): int(np.count_nonzero(tied[:, i] & tied[:, j])) for i, j in combinations(range(n_out), 2)}


def data_figures(name: str, emulation: Emulation, labels: np.ndarray | None, n_classes: int) -> DataFigures:
    """Error metrics, the n x n float-versus-fixed agreement and the argmax ties of one data set."""
    m = error_metrics(emulation, labels)
    fl = np.asarray(emulation.float_decisions).reshape(-1)
    fx = np.asarray(emulation.decisions).reshape(-1)
    pairs = pair_counts(fl, fx, n_classes)
    agreement = tuple(tuple(int(v) for v in row) for row in pairs)
    return DataFigures(name, m, agreement, argmax_ties(emulation.out_codes))
