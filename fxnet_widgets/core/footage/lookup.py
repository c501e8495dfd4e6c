"""The whole network under one plan as a table over every input colour.

With three 8-bit inputs (RGB) the integer network is a function of 2^24
colours, so it can be evaluated once for every colour and then applied to a
frame with one gather per pixel. :func:`compile_lookup` builds that table:

* colour index ``c = u_0 << (b*(n-1)) | ... | u_(n-1)`` (RGB: ``r << 16 | g << 8 | b``),
  for any network whose inputs total at most 24 bits;
* the table is made by the kernel's own steps: exact integer sums (layer 1 from a
  product table of the low inputs plus a per-chunk constant; later layers as exact
  integer sums), then :func:`~fxnet_widgets.core.kernel.post_accumulate` (steps 4-7, the
  function :func:`~fxnet_widgets.core.kernel.emulate` uses) applied once to every integer
  of each neuron's sum interval and read per colour, then the decision of step 8 (see
  :mod:`._build`); tests compare it with ``emulate`` on every colour of small networks;
* memory is bounded: besides the tables kept (2^24 bytes of decisions, 2^21 bytes
  bit-packed, the event table of 2^24 x 1, 2, 4 or 8 bytes, and with ``codes`` 2^24 x n_out
  x 2 or 4 bytes), the build may hold the event table once more (when some reachable event never
  happens and its bit is dropped), 5 bytes
  per integer of each neuron's sum interval (at most :data:`~._build.DOMAIN_MAX` = 2^22
  integers, 20 MB; wider intervals are evaluated directly), on the compiled path
  ``(8 x widest layer + 16)`` bytes per colour of the low inputs (at most 2^16 colours: 1.5 MiB
  for the demo network), and, on the numpy path, chunks of
  :data:`CHUNK_COLOURS` colours (about 64 bytes x 2^17 x the widest layer: 8 MB per neuron).
  Measured for the 3-3-1 demo network: 44 MiB at the peak, tables included
  (``benchmarks/bench_footage.py``, tracemalloc);
* results are cached by value (network digest, plan, options).

Per colour it keeps the decision (class index), optionally the output codes, and a
bit mask of the ``(layer, neuron, event)`` pairs that happen for that colour
(``acc_overflow``, ``table_low``, ``table_high``; only pairs that happen for some colour
get a bit), so per-frame event counts per neuron are gathers too.

Examples
--------
>>> from fxnet_widgets.core.network import Network
>>> from fxnet_widgets.core.plan import Plan
>>> import numpy as np
>>> net = Network.from_layers([([[1.0, -1.0]], [0.0], "sigmoid")], input_bits=4)
>>> plan = Plan.uniform(net, weight_bits=6, weight_frac=4, acc_bits=12, table_bits=8, table_frac=4, out_bits=8)
>>> lut = compile_lookup(net, plan)
>>> lut.size, lut.decide(np.array([[[9, 3], [3, 9]]], np.uint8)).tolist()
(256, [[1, 0]])
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..network import Network
from ..plan import Plan
from ._build import CHUNK_COLOURS, LOOKUP_EVENTS, MAX_INDEX_BITS, _build_fixed, _build_float

__all__ = ["ColourLookup", "compile_lookup", "compile_float_lookup", "colour_index", "CHUNK_COLOURS",
           "MAX_INDEX_BITS", "LOOKUP_EVENTS", "clear_lookup_cache"]  # fmt: skip


_CACHE: OrderedDict[Any, ColourLookup] = OrderedDict()
_CACHE_SIZE = 3
_LOCK = threading.Lock()


def clear_lookup_cache() -> None:
    """Forget every cached table (the look-ups and the per-frame tables made from them)."""
    with _LOCK:
        _CACHE.clear()
    from . import _coded

    _coded.clear()


@dataclass(frozen=True, eq=False)
class ColourLookup:
    """Decisions (and events, optionally output codes) of a network for every input colour.

    Attributes
    ----------
    network, plan : the network and the plan (``plan`` is None for the float network)
    bits, n_in : input bits and number of inputs; the table has ``2 ** (bits * n_in)`` entries
    decisions : (size,) uint8 class index per colour (read-only)
    packed : bit-packed decisions (``numpy.packbits(..., bitorder="little")``) for two classes, else None
    codes : (size, n_out) output codes per colour, or None
    events : (size,) unsigned bit mask of :attr:`event_slots` per colour, or None
    event_slots : tuple of ``(layer, neuron, event)`` (0-based) for the bits of :attr:`events`
    build_seconds : wall time of the build
    """

    network: Network
    plan: Plan | None
    bits: int
    n_in: int
    decisions: np.ndarray
    packed: np.ndarray | None
    codes: np.ndarray | None
    events: np.ndarray | None
    event_slots: tuple[tuple[int, int, str], ...]
    build_seconds: float
    n_classes: int = field(default=2)

    @property
    def size(self) -> int:
        return int(self.decisions.shape[0])

    @property
    def nbytes(self) -> int:
        """Memory held by the tables."""
        return sum(int(a.nbytes) for a in (self.decisions, self.packed, self.codes, self.events) if a is not None)

    def index(self, frame: Any) -> np.ndarray:
        """The colour index of every pixel (H x W int32/int64) of an H x W x n_in frame."""
        return colour_index(frame, self.bits, self.n_in)

    def decide(self, frame: Any) -> np.ndarray:
        """Decisions (H x W uint8 class index) of a frame: one gather per pixel.

        For 8-bit RGB with two classes this is one compiled loop (numba) reading the
        bit-packed table; otherwise a numpy ``take`` from the byte table.
        """
        arr = np.asarray(frame)
        fast = _fast_rgb(arr, self)
        if fast is not None and self.packed is not None:
            out = np.empty(arr.shape[:-1], dtype=np.uint8)
            fast.decide_packed(arr.reshape(-1, 3), self.packed, out.reshape(-1))
            return out
        return self.decisions.take(self.index(arr))

    def decide_take(self, frame: Any) -> np.ndarray:
        """:meth:`decide` the plain numpy way: pack the index, then ``np.take`` from the byte table."""
        return self.decisions.take(self.index(frame))

    def event_counts(self, index: np.ndarray) -> dict[tuple[int, int, str], int]:
        """Per ``(layer, neuron, event)`` slot, how many of the colour indices ``index`` have that event."""
        if self.events is None or not self.event_slots:
            return {}
        ev = self.events.take(np.asarray(index).reshape(-1))
        counts: dict[tuple[int, int, str], int] = {}
        as_bytes = ev.view(np.uint8).reshape(ev.shape[0], ev.dtype.itemsize)
        bit_of = (np.arange(256)[:, None] >> np.arange(8)[None, :]) & 1  # (256, 8)
        little = ev.dtype.byteorder in ("<", "=", "|") and np.little_endian
        for byte in range(ev.dtype.itemsize):
            col = as_bytes[:, byte if little else ev.dtype.itemsize - 1 - byte]
            per_bit = np.bincount(col, minlength=256) @ bit_of
            for b in range(8):
                slot = byte * 8 + b
                if slot < len(self.event_slots):
                    counts[self.event_slots[slot]] = int(per_bit[b])
        return counts

    def __repr__(self) -> str:
        what = "float network" if self.plan is None else repr(self.plan)
        return (f"<ColourLookup {self.size} colours, {self.n_classes} classes, {len(self.event_slots)} event slots, "
                f"{self.nbytes / 2**20:.1f} MiB: {what}>")  # fmt: skip


def colour_index(frame: Any, bits: int = 8, n_in: int = 3) -> np.ndarray:
    """Pack each pixel's input codes into one index (input 0 in the most significant bits)."""
    arr = np.asarray(frame)
    if arr.ndim < 1 or arr.shape[-1] != n_in or arr.dtype.kind not in "u":
        raise ValueError(f"frame must be an array of unsigned codes with {n_in} channels last, not {arr.dtype} "
                         f"{arr.shape}")  # fmt: skip
    if bits < 8 or arr.dtype != np.uint8:
        hi = int(arr.max()) if arr.size else 0
        if hi >= 1 << bits:
            raise ValueError(f"frame codes must be below 2**{bits} = {1 << bits}, not {hi}")
    dt = np.int32 if bits * n_in < 31 else np.int64
    idx = arr[..., 0].astype(dt)
    for i in range(1, n_in):
        idx <<= dt(bits)
        idx |= arr[..., i]
    return idx


def _cached(key: Any, make: Callable[[], ColourLookup]) -> ColourLookup:
    """Fixed-point tables (the last :data:`_CACHE_SIZE` plans) and float tables are kept apart,
    so trying plans never evicts the float table."""
    with _LOCK:
        if key in _CACHE:
            _CACHE.move_to_end(key)
            return _CACHE[key]
    value = make()
    with _LOCK:
        _CACHE[key] = value
        for kind, keep in (("fixed", _CACHE_SIZE), ("float", 2)):
            keys = [k for k in _CACHE if k[0] == kind]
            for k in keys[: max(0, len(keys) - keep)]:
                del _CACHE[k]
    return value


def compile_lookup(network: Network, plan: Plan, *, codes: bool = False, events: bool = True,
                   progress: Callable[[int, int], None] | None = None) -> ColourLookup:  # fmt: skip
    """The integer network under ``plan`` as a table over every input colour (cached by value).

    Parameters
    ----------
    network, plan
        The float network (inputs totalling at most 24 bits) and the plan.
    codes
        Also keep the output codes of every colour (``2^24 x n_out`` int16/int32).
    events
        Keep the per-colour event bit mask (networks of at most 21 neurons).
    progress
        Called as ``progress(done, total)`` in colours.
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if not isinstance(plan, Plan):
        raise TypeError(f"plan must be a Plan, not {type(plan).__name__}")
    plan.check(network)
    key = ("fixed", network.digest, plan, bool(codes), bool(events))
    return _cached(key, lambda: _build_fixed(network, plan, bool(codes), bool(events), progress))


def compile_float_lookup(network: Network, *, progress: Callable[[int, int], None] | None = None) -> ColourLookup:
    """The float network's decisions over every input colour, those of ``Network.predict`` (float64)
    and ``Network.decide`` colour for colour (cached).

    Computed in float32 chunks with a bound on their error; the colours near the decision
    boundary are recomputed by ``predict`` itself (:mod:`._float_build`; 2^24 bytes of
    decisions plus about 2 MiB of work for the demo network).
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    return _cached(("float", network.digest), lambda: _build_float(network, progress))


def _fast_rgb(arr: np.ndarray, lut: ColourLookup) -> Any:
    """The compiled loops, for C-contiguous H x W x 3 uint8 frames of an 8-bit RGB table (else None)."""
    if lut.bits != 8 or lut.n_in != 3 or arr.dtype != np.uint8 or arr.ndim < 2 or arr.shape[-1] != 3:
        return None
    if not arr.flags.c_contiguous:
        return None
    from . import _compiled

    return _compiled.kernels()
