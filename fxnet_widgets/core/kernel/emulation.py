"""The result of :func:`emulate`: every accumulator, code, decision and event count."""

from __future__ import annotations

import copy
from typing import Any

import numpy as np

from ..formats import bits_for_range
from ..network import Network
from ..plan import Plan
from .build import build_integer_network
from .caches import FLOAT_CACHE, LAYER_CACHE, SUM_CACHE
from .evaluate import Bounds, LayerOut, Prepared, frozen, prepare, run_layer, sums_and_bounds
from .layers import DATA_EVENTS, EVENT_NAMES, IntegerLayer, IntegerNetwork

__all__ = ["Emulation", "emulate", "class_dtype"]


_DECIDE_ROWS = 1 << 20


def class_dtype(n_classes: int) -> type:
    """The narrowest unsigned integer type that holds every class index below ``n_classes``."""
    for dt in (np.uint8, np.uint16, np.uint32):
        if n_classes - 1 <= np.iinfo(dt).max:
            return dt
    return np.uint64


class _FloatRef:
    """The float reference of one (network, input): outputs, and decisions made once on first use."""

    def __init__(self, network: Network, out: np.ndarray) -> None:
        self.network = network
        self.out = out
        self._decisions: np.ndarray | None = None

    @property
    def decisions(self) -> np.ndarray:
        if self._decisions is None:
            # Network.decide block by block, held like Emulation.decisions (no int64 copy of a frame)
            out = self.out.reshape(-1, self.out.shape[-1])
            dec: np.ndarray = np.empty(out.shape[0], dtype=class_dtype(out.shape[1]))
            for a in range(0, out.shape[0], _DECIDE_ROWS):
                dec[a : a + _DECIDE_ROWS] = self.network.decide(out[a : a + _DECIDE_ROWS])
            dec.setflags(write=False)
            self._decisions = dec
        return self._decisions


class Emulation:
    """Result of :func:`emulate` (read-only arrays).

    Attributes
    ----------
    out_codes : (N, n_out) or (H, W, n_out) output codes of the last layer
    decisions : (N,) or (H, W) decisions, in the narrowest unsigned integer type that holds every
        class index (uint8 up to 256 classes; the ``.npz`` file holds them as int64)
    acc : list, per layer, of s_A arrays (N x n_out_l or H x W x n_out_l)
    codes : list, per layer, of output codes
    events : list, per layer, of ``{event name: (n_out_l,) int64 counts}``
    safe_acc_bits : list, per layer, of (n_out_l,) guaranteed-safe widths
    observed_min, observed_max : list, per layer, of the exact sum's range on the data
    float_out, float_decisions : the float reference (computed on first access, cached; decisions
        held like ``decisions``)
    """

    def __init__(self, intnet: IntegerNetwork, prep: Prepared, outs: list[LayerOut]) -> None:
        self.integer_network = intnet
        self.network = intnet.network
        self.plan = intnet.plan
        self._prep = prep
        self._outs = outs
        self.shape = prep.shape
        self.n = prep.n
        self.events = [o.events for o in outs]
        self.safe_acc_bits = [L.safe_acc_bits for L in intnet.layers]
        #: the network whose float pass is this emulation's "float" (see :meth:`against`)
        self.float_network = intnet.network
        last = outs[-1].codes
        # the narrowest unsigned type that holds every class index (uint8 up to 256 classes):
        # on a 4K frame int64 decisions alone are 2.7x the frame's bytes; the .npz file keeps int64
        if last.shape[0] == 1:
            assert intnet.threshold_code is not None
            dec = (last[0] >= intnet.threshold_code).view(np.uint8)
        else:
            dec = np.argmax(last, axis=0).astype(class_dtype(last.shape[0]))
        dec.setflags(write=False)
        self._decisions = dec

    def _shaped(self, a: np.ndarray, per_sample: bool = False) -> np.ndarray:
        # per-layer arrays are held neurons-first (n_out, N); present N x n_out views
        if not per_sample:
            a = a.T
        if self.shape is None:
            return a
        return a.reshape(self.shape) if per_sample else a.reshape(*self.shape, a.shape[-1])

    @property
    def observed_min(self) -> list[np.ndarray]:
        return [o.observed[0] for o in self._outs]

    @property
    def observed_max(self) -> list[np.ndarray]:
        return [o.observed[1] for o in self._outs]

    def neuron_acc(self, layer: int, neuron: int) -> np.ndarray:
        """s_A of one neuron as a flat contiguous (N,) array (fast for plots)."""
        return self._outs[layer].acc[neuron]

    def neuron_sums(self, layer: int, neuron: int) -> np.ndarray:
        """Exact sums ``s`` (before the accumulator) of one neuron as a flat (N,) int64 array.

        Where no accumulator overflow happened they equal :meth:`neuron_acc`.
        """
        shifted, offset = self.neuron_shifted(layer, neuron)
        return np.add(shifted, np.int64(offset), dtype=np.int64)

    def neuron_shifted(self, layer: int, neuron: int) -> tuple[np.ndarray, int]:
        """``(d, offset)`` with ``s = d + offset``; ``d`` (N,) is non-negative, read-only, small dtype."""
        o = self._outs[layer]
        return o._shifted[neuron], int(o.layer.sum_min[neuron])

    def neuron_codes(self, layer: int, neuron: int) -> np.ndarray:
        """Output codes of one neuron as a flat contiguous (N,) array."""
        return self._outs[layer].codes[neuron]

    @property
    def inputs(self) -> np.ndarray:
        """The validated input codes (N x n_in)."""
        return self._prep.flat

    @property
    def out_codes(self) -> np.ndarray:
        return self._shaped(self._outs[-1].codes)

    @property
    def decisions(self) -> np.ndarray:
        return self._shaped(self._decisions, per_sample=True)

    @property
    def acc(self) -> list[np.ndarray]:
        return [self._shaped(o.acc) for o in self._outs]

    @property
    def codes(self) -> list[np.ndarray]:
        return [self._shaped(o.codes) for o in self._outs]

    @property
    def observed_acc_bits(self) -> list[np.ndarray]:
        """Per layer and neuron, the width that holds the exact sums seen on the data."""
        return [
            np.array([bits_for_range(a, b) for a, b in zip(mn.tolist(), mx.tolist())], dtype=np.int64)
            for mn, mx in zip(self.observed_min, self.observed_max)
        ]

    def against(self, reference: Network) -> Emulation:
        """This emulation with ``reference``'s float pass as its float side (``float_out``, ``float_decisions``).

        The integer results are shared, not recomputed; ``reference`` must take the same inputs and
        give as many outputs (a refined network's original, say). ``self`` when it already is the reference.
        """
        if reference == self.float_network:
            return self
        if (reference.n_in, reference.n_out) != (self.network.n_in, self.network.n_out):
            raise ValueError(f"reference must have {self.network.n_in} inputs and {self.network.n_out} outputs, "
                             f"not {reference.n_in} and {reference.n_out}")  # fmt: skip
        other = copy.copy(self)
        other.float_network = reference
        return other

    def _float_ref(self) -> _FloatRef:
        net = self.float_network
        key = (net.digest, self._prep.key)
        return FLOAT_CACHE.get(key, lambda: _FloatRef(net, net.predict(self._prep.flat)))

    @property
    def float_out(self) -> np.ndarray:
        out = self._float_ref().out
        return out if self.shape is None else out.reshape(*self.shape, out.shape[-1])

    @property
    def float_decisions(self) -> np.ndarray:
        """Decisions of the float network (read-only; computed once per network and input)."""
        dec = self._float_ref().decisions
        return dec if self.shape is None else dec.reshape(self.shape)

    @property
    def mismatch(self) -> int:
        """Number of samples whose fixed-point decision differs from float."""
        return int(np.count_nonzero(self.decisions != self.float_decisions))

    def event_totals(self) -> dict[str, int]:
        """Event counts summed over every neuron of every layer."""
        return {name: int(sum(int(e[name].sum()) for e in self.events)) for name in EVENT_NAMES}

    def summary_dict(self) -> dict[str, Any]:
        """A JSON-ready summary (deterministic)."""
        layers = []
        for L, e, mn, mx, ob in zip(
            self.integer_network.layers, self.events, self.observed_min, self.observed_max, self.observed_acc_bits
        ):
            layers.append(
                {
                    "layer": L.index + 1,
                    "activation": L.activation,
                    "format": L.describe(),
                    "acc_bits": L.plan.acc_bits,
                    "safe_acc_bits": L.safe_acc_bits.tolist(),
                    "observed_min": mn.tolist(),
                    "observed_max": mx.tolist(),
                    "observed_acc_bits": ob.tolist(),
                    "events": {k: v.tolist() for k, v in e.items()},
                }
            )
        return {
            "samples": self.n,
            "shape": list(self.shape) if self.shape is not None else None,
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch / self.n if self.n else 0.0,
            "events": self.event_totals(),
            "layers": layers,
            "notes": list(self.integer_network.notes),
        }

    def summary(self) -> str:
        """Deterministic text summary (for notebooks, reports and the CLI)."""
        d = self.summary_dict()
        shape = "x".join(map(str, self.shape)) + " image" if self.shape is not None else f"{self.n} samples"
        lines = [
            f"emulation of {shape}: {d['mismatch']} decisions differ from float "
            f"({100 * d['mismatch_fraction']:.3f} %)",
        ]
        for L in d["layers"]:
            lines.append("  " + L["format"])
            ev = ", ".join(f"{k} {sum(v)}" for k, v in L["events"].items())
            lines.append(f"    events: {ev}")
            lines.append(
                f"    safe accumulator width {L['safe_acc_bits']} (plan {L['acc_bits']}); "
                f"observed sums need {L['observed_acc_bits']}"
            )
        for note in d["notes"]:
            lines.append(f"  note: {note}")
        return "\n".join(lines)

    def npz_arrays(self) -> dict[str, np.ndarray]:
        """The arrays of the ``.npz`` result file, per ``semantics.md``."""
        out: dict[str, np.ndarray] = {
            "out_codes": self._outs[-1].codes.T.astype(np.int64),
            "decisions": self._decisions.astype(np.int64),
            "float_out": np.asarray(self.float_out, dtype=np.float64).reshape(self.n, self.network.n_out),
        }
        for l, o in enumerate(self._outs, start=1):
            out[f"acc_{l}"] = o.acc.T.astype(np.int64)
            out[f"codes_{l}"] = o.codes.T.astype(np.int64)
            for name in DATA_EVENTS + ("weight_clip",):
                out[f"{name}_{l}"] = np.asarray(o.events[name], dtype=np.int64)
        return out

    def __repr__(self) -> str:
        return f"<Emulation {self.n} samples, {self.mismatch} differ from float, events {self.event_totals()}>"


def _first_sums(layer: IntegerLayer, prep: Prepared, bits: int) -> tuple[list[np.ndarray], Bounds]:
    sums, bounds = sums_and_bounds(layer, prep, None, bits)
    return frozen(sums), bounds


def emulate(network: Network, plan: Plan, codes: Any) -> Emulation:
    """Run the bit-exact integer network on unsigned input codes.

    Parameters
    ----------
    network, plan
        The float network and the fixed-point plan (checked against each other).
    codes
        N x n_in unsigned integer codes, or an H x W x n_in image (e.g. uint8 RGB), or
        their :func:`.evaluate.prepare` result (a search evaluating many plans on the same
        data prepares it once, so the codes are not hashed again for every plan).

    Returns
    -------
    Emulation
        Image input gives image-shaped arrays.
    """
    intnet = build_integer_network(network, plan)
    if isinstance(codes, Prepared):
        prep = codes
        if prep.bits != network.input_bits or prep.flat.shape[1] != network.n_in:
            raise ValueError(f"codes must be prepared for {network.input_bits}-bit inputs x {network.n_in}, "
                             f"not {prep.bits}-bit x {prep.flat.shape[1]}")  # fmt: skip
    else:
        prep = prepare(codes, network.input_bits, network.n_in)
    outs: list[LayerOut] = []
    prev: LayerOut | None = None
    for li, layer in enumerate(intnet.layers):
        key = (network.digest, prep.key, plan.layers[: li + 1])

        def make(layer: IntegerLayer = layer, prev: LayerOut | None = prev) -> LayerOut:
            if prev is None:
                skey = (prep.key, network.input_bits, layer.q_w.shape, layer.q_w.tobytes(), layer.q_b.tobytes(),
                        layer.sum_min, layer.sum_max)  # fmt: skip
                sums, bounds = SUM_CACHE.get(skey, lambda: _first_sums(layer, prep, network.input_bits))
            else:
                sums, bounds = sums_and_bounds(layer, None, prev.codes, network.input_bits)
            return run_layer(layer, sums, bounds)

        prev = LAYER_CACHE.get(key, make)
        outs.append(prev)
    return Emulation(intnet, prep, outs)
