"""The session: one network, one current plan, the data, and every view's arrays.

A :class:`Session` (a traitlets ``HasTraits``) holds the network, the current
:class:`~fxnet_widgets.core.plan.Plan`, the data (an image and/or samples with
optional labels) and the slice positions. Whenever one of its traits changes it
runs the core once (the kernel caches by value), packs the outcome into plain
arrays (:class:`SessionResult`) and hands them to every registered view. Views
draw; they never call the kernel.

Latest value wins: a change that arrives while an update is running (for
example from a view's callback) only marks the session stale; when the running
update ends, the newest state is computed and the stale result is never shown.
A computation error leaves the last good result on screen and is reported in
:attr:`Session.error` (the status line shows it); an error inside one view is
reported in :attr:`Session.view_errors` and the other views still update.

Examples
--------
>>> import numpy as np
>>> from fxnet_widgets.core.network import Network
>>> net = Network.from_layers([([[4.0, -4.0, 0.0]], [0.0], "sigmoid")])
>>> s = Session(net, samples=np.array([[200, 10, 0], [10, 200, 0]]))
>>> s.result.samples.fixed.tolist()
[1, 0]
>>> s.plan = s.plan.replace(acc_bits=4)
>>> s.result.plan.layers[0].acc_bits
4
"""

from __future__ import annotations

import asyncio
import contextlib
import math
import os
import traceback
import weakref
from collections import OrderedDict
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
import traitlets as t

from ..core.formats import signed_range
from ..core.images import RGBImage, read_image
from ..core.kernel import EVENT_NAMES, Emulation, IntegerLayer, build_integer_network, emulate
from ..core.network import Network, as_codes
from ..core.plan import Plan
from ..core.starting import suggest_plan as default_plan
from ..render.raster import MAX_PREVIEW_WIDTH, DownscaledImage, downscale

__all__ = [
    "Session",
    "SessionResult",
    "ImageResult",
    "SampleResult",
    "SliceResult",
    "CubeResult",
    "NeuronResult",
    "default_plan",
    "exact_sums",
    "histogram_edges",
]

#: the three slices: (name, x input, y input, fixed input)
SLICES = (("R-G", 0, 1, 2), ("R-B", 0, 2, 1), ("G-B", 1, 2, 0))


# ---------------------------------------------------------------------------------
# plain results handed to the views
@dataclass(frozen=True, eq=False)
class ImageResult:
    """The image part: the codes the kernel saw, both decisions and the labels (H x W)."""

    codes: np.ndarray
    fixed: np.ndarray
    float_: np.ndarray
    factor: int
    full_shape: tuple[int, int]
    note: str
    emulation: Emulation
    labels: np.ndarray | None = None

    @property
    def mismatch(self) -> int:
        return int(np.count_nonzero(self.fixed != self.float_))


@dataclass(frozen=True, eq=False)
class SampleResult:
    """The samples: codes (N x n_in), labels (or None) and both decisions (N,)."""

    codes: np.ndarray
    labels: np.ndarray | None
    fixed: np.ndarray
    float_: np.ndarray
    emulation: Emulation


@dataclass(frozen=True, eq=False)
class SliceResult:
    """One slice of the input cube: ``fixed[iy, ix]`` at inputs (x[ix], y[iy], position).

    ``points_x``, ``points_y`` and ``points_class`` are the samples within
    ``tolerance`` codes of the slice (class = label, or fixed decision without labels).
    """

    name: str
    x_input: int
    y_input: int
    fixed_input: int
    position: int
    x: np.ndarray
    y: np.ndarray
    fixed: np.ndarray
    float_: np.ndarray
    points_x: np.ndarray
    points_y: np.ndarray
    points_class: np.ndarray
    tolerance: int

    @property
    def mismatch(self) -> int:
        return int(np.count_nonzero(self.fixed != self.float_))


@dataclass(frozen=True, eq=False)
class CubeResult:
    """Decisions on a regular grid over the whole input cube, indexed [red, green, blue]."""

    grid: np.ndarray
    fixed: np.ndarray
    float_: np.ndarray

    @property
    def mismatch(self) -> int:
        return int(np.count_nonzero(self.fixed != self.float_))


@dataclass(frozen=True, eq=False)
class NeuronResult:
    """Events and the histogram of exact accumulator sums of one neuron on the data.

    ``edges`` and the ``*_edges`` marks are in accumulator LSBs (integers);
    divide by ``2**acc_frac`` for real pre-activation values. The accumulator
    range is ``[acc_edges[0], acc_edges[1])``; the table window (the sums whose
    index is not clamped, exact for ``floor`` index rounding) is
    ``[table_edges[0], table_edges[1])``.
    """

    layer: int
    neuron: int
    label: str
    events: dict[str, int]
    edges: np.ndarray
    counts: np.ndarray
    acc_frac: int
    acc_edges: tuple[int, int]
    table_edges: tuple[int, int]
    safe_acc_bits: int
    observed_min: int
    observed_max: int

    def real(self, v: Any) -> np.ndarray:
        """Accumulator LSBs to real pre-activation values (float64)."""
        return np.ldexp(np.asarray(v, dtype=np.float64), -self.acc_frac)


@dataclass(frozen=True, eq=False)
class SessionResult:
    """Everything the views draw, for one plan and one set of slice positions."""

    plan: Plan
    generation: int
    classes: tuple[str, ...]
    image: ImageResult | None
    samples: SampleResult | None
    slices: tuple[SliceResult, ...] | None
    cube: CubeResult | None
    neurons: tuple[NeuronResult, ...]
    data_name: str
    descriptions: tuple[str, ...]

    @property
    def n_classes(self) -> int:
        return len(self.classes)

    @property
    def layer_safe_acc_bits(self) -> tuple[int, ...]:
        """Per layer, the widest guaranteed-safe width over its neurons."""
        out: dict[int, int] = {}
        for nr in self.neurons:
            out[nr.layer] = max(out.get(nr.layer, 1), nr.safe_acc_bits)
        return tuple(out[k] for k in sorted(out))

    def event_totals(self) -> dict[str, int]:
        return {name: sum(nr.events[name] for nr in self.neurons) for name in EVENT_NAMES}


# ---------------------------------------------------------------------------------
# helpers (pure functions on the core's results)
def exact_sums(emulation: Emulation, layer: int) -> np.ndarray:
    """The exact sums ``s`` (before the accumulator, N x n_out int64) of one layer.

    Where no accumulator overflow happened, ``s`` equals the kernel's ``s_A``;
    otherwise it differs by the wrap or the clamp (the kernel keeps the exact
    sums: :meth:`~fxnet_widgets.core.kernel.Emulation.neuron_sums`).
    """
    n_out = emulation.integer_network.layers[layer].n_out
    out = np.empty((emulation.n, n_out), dtype=np.int64)
    for j in range(n_out):
        out[:, j] = emulation.neuron_sums(layer, j)
    return out


def _table_edges(L: IntegerLayer) -> tuple[int, int]:
    """Sums whose index is not clamped: ``[lo, hi)`` in accumulator LSBs (floor index)."""
    k = L.shift
    if k >= 0:
        return L.index_min << k, (L.index_max + 1) << k
    m = -k
    return -((-L.index_min) >> m), (L.index_max >> m) + 1


def histogram_edges(lo: int, hi: int, marks: tuple[int, ...], bins: int = 64) -> np.ndarray:
    """Integer bin edges (int64, a power-of-two width) over ``[lo, hi]`` and the marks.

    The width is a power of two and the first edge a multiple of it, so any mark
    that is a multiple of the width is exactly an edge.
    """
    span_lo = min(lo, *marks) if marks else lo
    span_hi = max(hi + 1, *marks) if marks else hi + 1
    width = max(1, span_hi - span_lo)
    shift = max(0, math.ceil(math.log2(width / bins))) if width > bins else 0
    w = 1 << shift
    origin = (span_lo >> shift) << shift
    n = -(-(span_hi - origin) // w)
    return origin + w * np.arange(n + 1, dtype=np.int64)


# histogram counts by (sums array, offset, shift, bins): the kernel hands out the same
# read-only first-layer sums while the weights stay, and the bins often stay too
# (weak references: a cached entry never keeps a sums array alive)
_COUNTS: OrderedDict[tuple[int, int, int, int], tuple[weakref.ref, np.ndarray]] = OrderedDict()
_COUNTS_SIZE = 32


def _bin_counts(emulation: Emulation, layer: int, neuron: int, origin: int, shift: int, n_bins: int) -> np.ndarray:
    """Counts of ``(s - origin) >> shift`` over one neuron's exact sums ``s`` (all inside the bins)."""
    d, offset = emulation._neuron_shifted(layer, neuron)
    off = offset - origin  # s - origin = d + off >= 0
    key = (id(d), off, shift, n_bins)
    hit = _COUNTS.get(key)
    if hit is not None and hit[0]() is d and not d.flags.writeable:
        _COUNTS.move_to_end(key)
        return hit[1]
    counts = _count_bins(emulation, layer, neuron, d, off, origin, shift, n_bins)
    if not d.flags.writeable:  # read-only: the values behind this identity cannot change
        counts.setflags(write=False)
        _COUNTS[key] = (weakref.ref(d), counts)
        while len(_COUNTS) > _COUNTS_SIZE:
            _COUNTS.popitem(last=False)
    return counts


def _count_bins(emulation: Emulation, layer: int, neuron: int, d: np.ndarray, off: int, origin: int, shift: int,
                n_bins: int) -> np.ndarray:  # fmt: skip
    top = int(emulation.observed_max[layer][neuron]) - origin
    if top < 2**31 and off >= 0:
        idx = d.astype(np.int32)
        if off:
            idx += np.int32(off)
    else:
        idx = d.astype(np.int64) + np.int64(off)
    if shift:
        idx >>= shift
    return np.bincount(idx, minlength=n_bins)[:n_bins]


def _neuron_results(network: Network, emus: list[Emulation], bins: int) -> tuple[NeuronResult, ...]:
    intnet = emus[0].integer_network
    out = []
    live = [e for e in emus if e.n]
    for li, L in enumerate(intnet.layers):
        alo, ahi = signed_range(L.plan.acc_bits)
        acc_edges = (alo, ahi + 1)
        t_edges = _table_edges(L)
        for j in range(L.n_out):
            dmin = min(int(e.observed_min[li][j]) for e in live) if live else 0
            dmax = max(int(e.observed_max[li][j]) for e in live) if live else 0
            marks = t_edges
            span = max(t_edges[1], dmax + 1) - min(t_edges[0], dmin)
            if acc_edges[1] - acc_edges[0] <= 4 * span:
                marks = marks + acc_edges
            edges = histogram_edges(dmin, dmax, marks, bins)
            shift = int(edges[1] - edges[0]).bit_length() - 1
            counts = np.zeros(edges.size - 1, dtype=np.int64)
            for e in live:
                counts += _bin_counts(e, li, j, int(edges[0]), shift, counts.size)
            ev = {
                name: int(sum(int(e.events[li][name][j]) for e in emus))
                for name in ("acc_overflow", "table_low", "table_high")
            }
            ev["weight_clip"] = int(L.weight_clip[j])
            ev["bias_clip"] = int(L.bias_clip[j])
            out.append(
                NeuronResult(
                    layer=li, neuron=j, label=f"L{li + 1} n{j + 1}", events=ev, edges=edges, counts=counts,
                    acc_frac=L.acc_frac, acc_edges=acc_edges, table_edges=t_edges,
                    safe_acc_bits=int(L.safe_acc_bits[j]), observed_min=dmin, observed_max=dmax,
                )
            )  # fmt: skip
    return tuple(out)


def _as_image(image: Any) -> tuple[np.ndarray, str]:
    if isinstance(image, RGBImage):
        return image.codes, image.note
    if isinstance(image, (str, os.PathLike)):
        img = read_image(image)
        return img.codes, img.note
    arr = np.asarray(image)
    if arr.dtype.kind not in "iu" or arr.dtype == np.bool_:
        raise TypeError(f"image must be an H x W x 3 array of unsigned integer codes, not {arr.dtype}")
    if arr.ndim != 3:
        raise ValueError(f"image must be an H x W x channels array, not shape {arr.shape}")
    return arr, ""


# ---------------------------------------------------------------------------------
class Session(t.HasTraits):
    """Network, current plan and data; runs the core once per change.

    Parameters
    ----------
    network
        The float network.
    image
        Optional H x W x n_in codes (uint8 RGB), an :class:`RGBImage` or an image path.
    samples, labels
        Optional N x n_in codes and their class labels (N,); ``labels`` of the
        image's H x W shape label the image instead.
    image_labels
        Optional H x W class labels of the image (for accuracy in the metrics).
    plan
        Starting plan (default: :func:`default_plan`).
    slice_points
        Points per axis of the three slices (128: codes 0, 2, ..., 254).
    cube_points
        Points per axis of the whole-cube grid (32: codes 4, 12, ..., 252).
    preview_width
        Widest live preview; wider images are subsampled (full resolution on demand).
    bins
        About this many histogram bins per neuron.
    coalesce_seconds
        A change from the browser waits this long for newer ones (latest value
        wins); changes made by code are computed at once.
    """

    plan = t.Instance(Plan)
    slice_red = t.Int(128)
    slice_green = t.Int(128)
    slice_blue = t.Int(128)
    full_resolution = t.Bool(False)
    #: "" when the last computation worked, else its one-line message
    error = t.Unicode("")
    #: one line per failing view: ``{view name: message}``
    view_errors = t.Dict()
    #: completed updates (observe this to know the views hold new arrays)
    version = t.Int(0)

    def __init__(
        self,
        network: Network,
        image: Any = None,
        samples: Any = None,
        labels: Any = None,
        plan: Plan | None = None,
        *,
        image_labels: Any = None,
        slice_points: int = 128,
        cube_points: int = 32,
        preview_width: int = MAX_PREVIEW_WIDTH,
        bins: int = 64,
        coalesce_seconds: float = 0.02,
    ) -> None:
        if not isinstance(network, Network):
            raise TypeError(f"network must be a Network, not {type(network).__name__}")
        for name, v, lo, hi in (("slice_points", slice_points, 2, 1024), ("cube_points", cube_points, 2, 128),
                                ("bins", bins, 4, 4096)):  # fmt: skip
            if not isinstance(v, int) or isinstance(v, bool) or not lo <= v <= hi:
                raise ValueError(f"{name} must be an integer between {lo} and {hi}, not {v!r}")
        self.network = network
        self.bins = bins
        n_codes = 1 << network.input_bits
        self.image_note = ""
        self._image: np.ndarray | None = None
        self._preview: DownscaledImage | None = None
        if image is not None:
            codes, self.image_note = _as_image(image)
            as_codes(codes, network.input_bits, network.n_in, what="image")
            codes = np.ascontiguousarray(codes)
            codes.setflags(write=False)
            self._image = codes
            self._preview = downscale(codes, preview_width)
        self._samples: np.ndarray | None = None
        self._labels: np.ndarray | None = None
        self._image_labels: np.ndarray | None = None
        n_cls = len(network.classes)
        if samples is not None:
            flat, _ = as_codes(np.asarray(samples), network.input_bits, network.n_in, what="samples")
            self._samples = np.array(flat)
        if labels is not None:
            lab = np.asarray(labels)
            if lab.dtype.kind not in "iub":
                raise TypeError(f"labels must be integer class indices, not {lab.dtype}")
            if self._image is not None and lab.shape == self._image.shape[:2]:
                target = "image"
            elif self._samples is not None and lab.shape == (self._samples.shape[0],):
                target = "samples"
            else:
                want = []
                if self._samples is not None:
                    want.append(f"({self._samples.shape[0]},) for the samples")
                if self._image is not None:
                    want.append(f"{self._image.shape[:2]} for the image")
                raise ValueError(f"labels must have shape {' or '.join(want) or '(N,) with samples'}, not {lab.shape}")
            if lab.size and (int(lab.min()) < 0 or int(lab.max()) >= n_cls):
                bad = int(lab.min()) if int(lab.min()) < 0 else int(lab.max())
                raise ValueError(f"labels must be between 0 and {n_cls - 1} (class indices), not {bad}")
            lab = lab.astype(np.int64)
            lab.setflags(write=False)
            if target == "image":
                self._image_labels = lab
            else:
                self._labels = lab
        if image_labels is not None:
            if self._image is None:
                raise ValueError("image_labels need an image")
            lab = np.asarray(image_labels)
            if lab.dtype.kind not in "iub":
                raise TypeError(f"image_labels must be integer class indices, not {lab.dtype}")
            if lab.shape != self._image.shape[:2]:
                raise ValueError(f"image_labels must have the image's shape {self._image.shape[:2]}, not {lab.shape}")
            if lab.size and (int(lab.min()) < 0 or int(lab.max()) >= n_cls):
                bad = int(lab.min()) if int(lab.min()) < 0 else int(lab.max())
                raise ValueError(f"image_labels must be between 0 and {n_cls - 1} (class indices), not {bad}")
            self._image_labels = lab.astype(np.int64)
            self._image_labels.setflags(write=False)
        self.cube_ok = network.n_in == 3
        step = max(1, n_codes // slice_points)
        self.slice_codes = np.arange(0, n_codes, step, dtype=np.int64)[:slice_points]
        cstep = max(1, n_codes // cube_points)
        self.cube_codes = (np.arange(cube_points, dtype=np.int64) * cstep + cstep // 2).clip(0, n_codes - 1)
        if self.cube_ok:
            g = np.stack(np.meshgrid(self.cube_codes, self.cube_codes, self.cube_codes, indexing="ij"), -1)
            self._cube_input = np.ascontiguousarray(g.reshape(-1, 3).astype(np.uint8 if n_codes <= 256 else np.uint16))
        mid = int(self.slice_codes[len(self.slice_codes) // 2])
        self._views: list[tuple[str, Callable[[SessionResult], None]]] = []
        self._result: SessionResult | None = None
        self._parts: dict[str, tuple[Any, Any]] = {}
        self._wanted = 0
        self._done = 0
        self._busy = False
        self._deferring = 0
        self._scheduled = False
        #: results computed so far (stale states skipped by coalescing are not counted)
        self.computed = 0
        #: how long a browser change waits for newer ones before it is computed
        self.coalesce_seconds = coalesce_seconds
        super().__init__(
            plan=(plan if plan is not None else default_plan(network, [self._image, self._samples])).check(network),
            slice_red=mid, slice_green=mid, slice_blue=mid,
        )  # fmt: skip
        self.observe(self._changed, names=["plan", "slice_red", "slice_green", "slice_blue", "full_resolution"])
        self._request()

    # -- validation -----------------------------------------------------------------
    @t.validate("plan")
    def _check_plan(self, proposal: Any) -> Plan:
        plan = proposal["value"]
        plan.check(self.network)
        return plan

    @t.validate("slice_red", "slice_green", "slice_blue")
    def _check_slice(self, proposal: Any) -> int:
        v = proposal["value"]
        hi = (1 << self.network.input_bits) - 1
        if not 0 <= v <= hi:
            raise t.TraitError(f"{proposal['trait'].name} must be between 0 and {hi}, not {v!r}")
        return v

    # -- data -------------------------------------------------------------------------
    @property
    def image(self) -> np.ndarray | None:
        """The full-resolution input image (read-only), or None."""
        return self._image

    @property
    def samples(self) -> np.ndarray | None:
        return self._samples

    @property
    def labels(self) -> np.ndarray | None:
        """Labels of the samples (N,), or None."""
        return self._labels

    @property
    def image_labels(self) -> np.ndarray | None:
        """Labels of the full image (H x W), or None."""
        return self._image_labels

    @property
    def result(self) -> SessionResult:
        """The arrays every view shows now (the last update that worked).

        Reading it first computes a change still waiting in :meth:`deferred`.
        """
        self.flush()
        assert self._result is not None
        return self._result

    @property
    def pending(self) -> bool:
        """True while a change waits to be computed (see :meth:`deferred`)."""
        return self._done != self._wanted

    @property
    def slice_positions(self) -> tuple[int, int, int]:
        """(red, green, blue) positions of the G-B, R-B and R-G slices."""
        return (self.slice_red, self.slice_green, self.slice_blue)

    # -- views --------------------------------------------------------------------------
    def add_view(self, name: str, callback: Callable[[SessionResult], None]) -> None:
        """Register a view: ``callback(result)`` now and after every update."""
        self._views.append((name, callback))
        if self._result is not None:
            self._call_view(name, callback, self._result)

    def _call_view(self, name: str, callback: Callable[[SessionResult], None], result: SessionResult) -> None:
        errors = dict(self.view_errors)
        try:
            callback(result)
        except Exception as exc:  # a failing view must not stop the others
            errors[name] = f"{name}: {type(exc).__name__}: {exc}"
            self._last_view_traceback = traceback.format_exc()
        else:
            errors.pop(name, None)
        if errors != self.view_errors:
            self.view_errors = errors

    # -- updates --------------------------------------------------------------------
    def _changed(self, change: Any) -> None:
        self._request()

    @contextlib.contextmanager
    def deferred(self) -> Iterator[None]:
        """Changes inside only mark the session stale; the newest state is computed once.

        On leaving, with an asyncio loop running in this thread (a Jupyter
        kernel), the computation is scheduled ``coalesce_seconds`` later: front-end
        messages that arrive meanwhile or are already waiting (a slider being
        dragged) are applied first, so only the latest value is computed; without a running loop it
        runs at once. The controls use this for changes that come from the
        browser; changes made by code are computed before the assignment returns.
        """
        self._deferring += 1
        try:
            yield
        finally:
            self._deferring -= 1
            if not self._deferring and self.pending:
                try:
                    loop = asyncio.get_running_loop()
                except RuntimeError:
                    loop = None
                if loop is None:
                    self.flush()
                elif not self._scheduled:
                    self._scheduled = True
                    loop.call_later(self.coalesce_seconds, self._scheduled_flush)

    def _scheduled_flush(self) -> None:
        self._scheduled = False
        self.flush()

    def flush(self) -> None:
        """Compute now if a change is waiting (no-op otherwise, and inside an update)."""
        if self.pending and not self._busy and not self._deferring:
            self._run()

    def _request(self) -> None:
        """A change: compute now, unless an update runs or changes are being deferred."""
        self._wanted += 1
        if self._busy or self._deferring:
            return
        self._run()

    def _run(self) -> None:
        """Coalescing update loop: compute the newest state; never show a stale one."""
        self._busy = True
        try:
            while self._done != self._wanted:
                gen = self._wanted
                try:
                    result = self._compute(gen)
                except Exception as exc:
                    self._done = gen
                    msg = str(exc).splitlines()[0] if str(exc) else ""
                    self.error = f"{type(exc).__name__}: {msg}"
                    continue
                if gen != self._wanted:
                    continue  # a newer state arrived while computing: skip this one
                self._result = result
                self.computed += 1
                if self.error:
                    self.error = ""
                for name, cb in list(self._views):
                    if gen != self._wanted:
                        break
                    self._call_view(name, cb, result)
                self._done = gen
                if gen == self._wanted:
                    self.version += 1
        finally:
            self._busy = False

    def _part(self, name: str, key: Any, make: Callable[[], Any]) -> Any:
        old = self._parts.get(name)
        if old is not None and old[0] == key:
            return old[1]
        value = make()
        self._parts[name] = (key, value)
        return value

    def _compute(self, gen: int) -> SessionResult:
        net, plan = self.network, self.plan
        build_integer_network(net, plan)  # raises for a plan the kernel refuses
        image = None
        if self._image is not None:
            image = self._part("image", (plan, self.full_resolution), lambda: self._image_part(plan))
        samples = None
        if self._samples is not None:
            samples = self._part("samples", plan, lambda: self._samples_part(plan))
        slices = cube = None
        if self.cube_ok:
            pos = self.slice_positions
            slices = self._part("slices", (plan, pos), lambda: self._slices_part(plan, pos))
            cube = self._part("cube", plan, lambda: self._cube_part(plan))
        emus = [p.emulation for p in (image, samples) if p is not None]
        data_name = " + ".join(n for n, p in (("image", image), ("samples", samples)) if p is not None)
        if not emus:
            emus = [emulate(net, plan, self._cube_input)] if self.cube_ok else []
            data_name = "cube grid"
        if not emus:
            raise ValueError("a session needs an image or samples for a network without 3 inputs")
        key = (plan, self.full_resolution)
        neurons = self._part("neurons", key, lambda: _neuron_results(net, emus, self.bins))
        desc = tuple(L.describe() for L in build_integer_network(net, plan).layers)
        return SessionResult(plan, gen, tuple(net.classes), image, samples, slices, cube, neurons, data_name, desc)

    def _image_part(self, plan: Plan) -> ImageResult:
        assert self._image is not None and self._preview is not None
        if self.full_resolution or not self._preview.downscaled:
            codes, factor = self._image, 1
        else:
            codes, factor = self._preview.codes, self._preview.factor
        emu = emulate(self.network, plan, codes)
        h, w = self._image.shape[:2]
        note = DownscaledImage(codes, factor, (h, w)).note
        labels = None
        if self._image_labels is not None:
            labels = self._image_labels if factor == 1 else self._image_labels[::factor, ::factor]
        return ImageResult(codes, emu.decisions, emu.float_decisions, factor, (h, w), note, emu, labels)

    def _samples_part(self, plan: Plan) -> SampleResult:
        assert self._samples is not None
        emu = emulate(self.network, plan, self._samples)
        return SampleResult(self._samples, self._labels, emu.decisions, emu.float_decisions, emu)

    def _slices_part(self, plan: Plan, pos: tuple[int, int, int]) -> tuple[SliceResult, ...]:
        c = self.slice_codes
        n = c.size
        dt = np.uint8 if self.network.input_bits <= 8 else np.uint16
        stack = np.empty((3 * n, n, 3), dtype=dt)
        for si, (_, xi, yi, fi) in enumerate(SLICES):
            block = stack[si * n : (si + 1) * n]
            block[..., xi] = c[None, :]
            block[..., yi] = c[:, None]
            block[..., fi] = pos[fi]
        emu = emulate(self.network, plan, stack)
        fx, fl = emu.decisions, emu.float_decisions
        tol = max(1, int(c[1] - c[0]) * 4) if n > 1 else 1
        out = []
        for si, (name, xi, yi, fi) in enumerate(SLICES):
            if self._samples is not None:
                near = np.abs(self._samples[:, fi].astype(np.int64) - pos[fi]) <= tol
                px = self._samples[near, xi].astype(np.int64)
                py = self._samples[near, yi].astype(np.int64)
                if self._labels is not None:
                    pc = self._labels[near]
                else:
                    s_part = self._part("samples", plan, lambda: self._samples_part(plan))
                    pc = s_part.fixed[near]
            else:
                px = py = pc = np.zeros(0, dtype=np.int64)
            out.append(
                SliceResult(name, xi, yi, fi, int(pos[fi]), c, c, fx[si * n : (si + 1) * n], fl[si * n : (si + 1) * n],
                            px, py, np.asarray(pc, dtype=np.int64), tol)
            )  # fmt: skip
        return tuple(out)

    def _cube_part(self, plan: Plan) -> CubeResult:
        emu = emulate(self.network, plan, self._cube_input)
        n = self.cube_codes.size
        return CubeResult(self.cube_codes, emu.decisions.reshape(n, n, n), emu.float_decisions.reshape(n, n, n))

    def refresh(self) -> None:
        """Recompute and redraw every view (e.g. after a view was fixed)."""
        self._parts.clear()
        self._request()

    # -- state ----------------------------------------------------------------------
    def get_state(self) -> dict[str, Any]:
        """JSON-ready state: the plan document, slice positions, full resolution."""
        return {
            "plan": self.plan.to_dict(),
            "slice": [self.slice_red, self.slice_green, self.slice_blue],
            "full_resolution": bool(self.full_resolution),
        }

    def set_state(self, state: dict[str, Any]) -> None:
        """Restore :meth:`get_state` (one update for the whole state)."""
        if not isinstance(state, dict):
            raise TypeError(f"state must be a dict, not {type(state).__name__}")
        unknown = sorted(set(state) - {"plan", "slice", "full_resolution"})
        if unknown:
            raise ValueError(f"{unknown[0]} is not a session state key (known: full_resolution, plan, slice)")
        plan = Plan.from_dict(state["plan"]).check(self.network) if "plan" in state else self.plan
        sl = state.get("slice", list(self.slice_positions))
        if not isinstance(sl, (list, tuple)) or len(sl) != 3:
            raise ValueError(f"slice must be a list of 3 codes, not {sl!r}")
        with self.hold_trait_notifications():
            self.plan = plan
            self.slice_red, self.slice_green, self.slice_blue = (int(v) for v in sl)
            self.full_resolution = bool(state.get("full_resolution", self.full_resolution))

    def summary(self) -> str:
        """Deterministic text: plan, safe widths, disagreements and events."""
        r = self.result
        lines = [f"plan: {r.plan!r}"]
        for d, safe in zip(r.descriptions, r.layer_safe_acc_bits):
            lines.append(f"  {d}; safe accumulator {safe} b")
        if r.image is not None:
            lines.append(f"image ({r.image.note}): {r.image.mismatch} of {r.image.fixed.size} pixels differ from float")
        if r.samples is not None:
            s = r.samples
            line = f"samples: {int(np.count_nonzero(s.fixed != s.float_))} of {s.fixed.size} differ from float"
            if s.labels is not None:
                line += f"; fixed point right on {int(np.count_nonzero(s.fixed == s.labels))}"
                line += f", float right on {int(np.count_nonzero(s.float_ == s.labels))}"
            lines.append(line)
        if r.slices is not None:
            parts = [f"{sl.name} at {sl.position}: {sl.mismatch}" for sl in r.slices]
            lines.append(f"slices ({r.slices[0].x.size}x{r.slices[0].y.size}) differing cells: " + ", ".join(parts))
        if r.cube is not None:
            n = r.cube.grid.size
            lines.append(f"cube grid {n}x{n}x{n}: {r.cube.mismatch} points differ from float")
        ev = r.event_totals()
        lines.append(f"events on {r.data_name}: " + ", ".join(f"{k} {v}" for k, v in ev.items()))
        if self.error:
            lines.append(f"error: {self.error}")
        return "\n".join(lines)
