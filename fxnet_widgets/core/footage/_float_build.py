"""The float network's decisions over every input colour: fast float32 chunks, float64 where it matters.

The decisions are those of :meth:`Network.predict` (float64, the reference of the
semantics) followed by :meth:`Network.decide`, colour for colour. They are computed in
two steps:

1. every colour in float32, chunk by chunk. Layer 1 is separable: its sum is a table over
   the low inputs (``w_1 x_1 + w_2 x_2`` for RGB, 2^16 entries per neuron) plus one
   constant per value of the high inputs (``w_0 x_0 + b``), both made in float64 and rounded
   once, so a chunk's layer-1 sums are one broadcast add; the later layers are float32
   products and sums. With the result comes a bound on its distance to ``predict``'s
   float64 result (:func:`error_bound`: forward error analysis of both computations);
2. every colour whose float32 output lies within that bound of the decision boundary
   (the threshold, or a tie between the two largest outputs), or is not finite, is
   recomputed by ``predict`` itself. Every other colour has the same decision in both,
   because the two results differ by less than the margin to the boundary.

Memory: besides the 2^24-byte decision table, the low-input tables (2^16 x 4 bytes per
layer-1 neuron) and per chunk of :data:`CHUNK` colours about ``4 x (2 x widest layer + 2)``
bytes per colour (the 3-3-1 demo network: 2 MiB per chunk).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from ..network import Network

__all__ = ["CHUNK", "build_float_decisions", "error_bound", "float32_chunk"]

#: colours per float32 chunk (at least; whole values of the high inputs)
CHUNK = 1 << 16
_U32 = 2.0**-24  # unit roundoff of float32 (IEEE 754 binary32: 24-bit significand)
_U64 = 2.0**-53  # unit roundoff of float64 (IEEE 754 binary64: 53-bit significand)
#: error budget of exp/tanh (and of sigmoid's add and divide) in units of the roundoff, where NumPy
#: documents a few ulp for its vectorised float32 exp (from memory: about 2.5 ulp, NumPy 1.18 release
#: notes); the tests check the whole bound against predict on every colour of small networks
_FUNC_ULPS = 16.0
_LIPSCHITZ = {"sigmoid": 0.25, "tanh": 1.0, "relu": 1.0, "identity": 1.0}


def _gamma(n: int, u: float) -> float:
    return n * u / (1 - n * u)


def error_bound(network: Network) -> np.ndarray:
    """Per output, a bound on ``|float32 chunk output - predict output|`` over every input colour.

    Forward error analysis (recursive summation, gamma_n = n u / (1 - n u)): per layer the
    error of the sums is ``|W| e_prev + gamma_(n+1) (|W| m_prev + |b|)`` (plus the rounding of
    the weights to float32), the activation multiplies it by its Lipschitz constant and adds
    its own rounding; ``m`` bounds the magnitudes. Done for the float32 chunks and for
    ``predict``'s float64 sums, added, and doubled for safety.
    """
    total = np.zeros(network.n_out)
    for u, first in ((_U32, 4 * _U32 + _gamma(network.n_in + 3, _U64)), (_U64, _gamma(network.n_in + 2, _U64))):
        m = np.full(network.n_in, (2**network.input_bits - 1) * network.input_factor())
        e = np.zeros(network.n_in)
        for li, L in enumerate(network.layers):
            w, b = np.abs(L.weights), np.abs(L.bias)
            size = w @ m + b
            if li == 0:  # float64 table sums, rounded to float32 once each and added
                ez = first * size
            else:
                ez = (1 + u) * (w @ e) + (_gamma(w.shape[1] + 1, u) + u) * (1 + u) * size
            act = L.activation
            bounded = act in ("sigmoid", "tanh")
            e = _LIPSCHITZ[act] * ez + (_FUNC_ULPS * u if bounded else 0.0)  # relu, identity: exact
            m = np.ones_like(size) if bounded else size + ez
        total += e
    return 2 * total + 1e-30


def _activate32(z: np.ndarray, activation: str) -> None:
    if activation == "sigmoid":
        with np.errstate(over="ignore"):  # exp(-z) overflows to inf for z < -88: 1/(1+inf) = 0
            np.negative(z, out=z)
            np.exp(z, out=z)
            z += np.float32(1)
            np.reciprocal(z, out=z)
    elif activation == "tanh":
        np.tanh(z, out=z)
    elif activation == "relu":
        np.maximum(z, np.float32(0), out=z)


def _parts(network: Network) -> tuple[np.ndarray, np.ndarray]:
    """Layer 1's sums in float64, rounded to float32: over the low inputs (n1, colours) and per
    value of the high inputs (values, n1)."""
    from ._build import _index_codes

    bits, n_in = network.input_bits, network.n_in
    n_low = min(n_in, max(1, 16 // bits))
    n_high = n_in - n_low
    factor = network.input_factor()
    w, b = network.layers[0].weights, network.layers[0].bias
    low = _index_codes(0, 1 << (bits * n_low), bits, n_low).astype(np.float64) * factor
    high = _index_codes(0, 1 << (bits * n_high), bits, n_high).astype(np.float64) * factor if n_high \
        else np.zeros((1, 0))  # fmt: skip
    low32 = np.ascontiguousarray((low @ w[:, n_high:].T).T.astype(np.float32))
    high32 = (high @ w[:, :n_high].T + b[None, :]).astype(np.float32)
    return low32, high32


def float32_chunk(network: Network, low32: np.ndarray, high32: np.ndarray, h0: int, h1: int) -> np.ndarray:
    """float32 outputs (n_out, colours) of the colours ``h0 * n_low .. h1 * n_low``."""
    n1, n_low = low32.shape
    z = (low32[:, None, :] + high32[h0:h1].T[:, :, None]).reshape(n1, (h1 - h0) * n_low)
    layers = network.layers
    _activate32(z, layers[0].activation)
    h = z
    for L in layers[1:]:
        w32, b32 = L.weights.astype(np.float32), L.bias.astype(np.float32)
        if w32.shape[1] <= 8:  # few inputs: products and sums in place, no BLAS call per chunk
            z = np.empty((w32.shape[0], h.shape[1]), dtype=np.float32)
            tmp = np.empty(h.shape[1], dtype=np.float32)
            for j in range(w32.shape[0]):
                z[j].fill(b32[j])
                for i in range(w32.shape[1]):
                    np.multiply(h[i], w32[j, i], out=tmp)
                    z[j] += tmp
        else:
            z = w32 @ h
            z += b32[:, None]
        _activate32(z, L.activation)
        h = z
    return h


def _near_boundary(network: Network, out: np.ndarray, tol: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Decisions of float32 outputs (n_out, N), and where they may differ from ``predict``'s."""
    if out.shape[0] == 1:
        o = out[0].astype(np.float64)
        unsure = ~np.isfinite(o) | (np.abs(o - network.threshold) <= tol[0])
        return (o >= network.threshold).astype(np.uint8), unsure
    o = out.astype(np.float64)
    best = np.argmax(o, axis=0)
    cols = np.arange(o.shape[1])
    top = o[best, cols]
    o[best, cols] = -np.inf
    second = np.max(o, axis=0)
    # the two largest may swap when their gap is within both bounds (ties: predict's argmax decides)
    unsure = ~np.isfinite(top) | ~np.isfinite(second) | (top - second <= 2 * float(tol.max()))
    return best.astype(np.uint8), unsure


def build_float_decisions(network: Network, progress: Callable[[int, int], None] | None = None) -> tuple[
        np.ndarray, int]:  # fmt: skip
    """Decisions of ``predict`` + ``decide`` on every colour (uint8), and how many colours were
    recomputed by ``predict`` (near the boundary)."""
    bits, n_in = network.input_bits, network.n_in
    size = 1 << (bits * n_in)
    low32, high32 = _parts(network)
    n_low = low32.shape[1]
    group = max(1, CHUNK // n_low)
    tol = error_bound(network)
    decisions = np.empty(size, dtype=np.uint8)
    redone = 0
    for h0 in range(0, high32.shape[0], group):
        h1 = min(high32.shape[0], h0 + group)
        start, stop = h0 * n_low, h1 * n_low
        d, unsure = _near_boundary(network, float32_chunk(network, low32, high32, h0, h1), tol)
        where = np.flatnonzero(unsure)
        if where.size:  # the reference itself, on the colours the float32 result cannot settle
            d[where] = network.decide(network.predict(_codes_of(where + start, bits, n_in)))
            redone += int(where.size)
        decisions[start:stop] = d
        if progress is not None:
            progress(stop, size)
    return decisions, redone


def _codes_of(index: np.ndarray, bits: int, n_in: int) -> Any:
    mask = (1 << bits) - 1
    c = index.astype(np.int64)
    return np.stack([(c >> (bits * (n_in - 1 - i))) & mask for i in range(n_in)], axis=1)
