"""The session: one network, one current plan, the data, and every view's records.

A :class:`Session` (a traitlets ``HasTraits``) holds the network, the current
:class:`~fxnet_widgets.core.plan.Plan`, the data (:class:`~fxnet_widgets.widgets.data.SessionData`)
and the slice positions. Whenever one of its traits changes it runs the core once
(the kernel caches by value), packs the outcome into records
(:mod:`fxnet_widgets.widgets.results`) and hands them to every registered view.
Views draw; they never call the kernel.

Latest value wins: a change that arrives while an update is running (for
example from a view's callback) only marks the session stale; when the running
update ends, the newest state is computed and the stale result is never shown.
A computation error leaves the last good result on screen and is reported in
:attr:`Session.error` (the status line shows it); an error inside one view is
reported in :attr:`Session.view_errors` and the other views still update.

Python and the page: every plan change, from any origin, raises
:attr:`Session.plan_version`. A change a person makes on the page arrives
through :meth:`Session.page_change`, stamped with the plan version the control
showed; a change stamped with an older version than the current one (it was
made on a state the kernel has since replaced) is dropped, never replayed.

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
import time
import traceback
from collections.abc import Callable, Iterator
from typing import Any

import numpy as np
import traitlets as t

from ..core.analysis.cost import hardware_cost
from ..core.kernel import build_integer_network, emulate
from ..core.network import Network
from ..core.plan import Plan
from ..core.starting import starting_plan, suggest_plan
from ..render.raster import MAX_PREVIEW_WIDTH
from . import parts, swap
from .binning import BinCounter, neuron_results
from .data import SessionData, replace_image
from .results import SessionResult, layer_kind
from .text import summary_text

__all__ = ["Session", "default_plan"]


# ---------------------------------------------------------------------------------
# the starting plan (the one place the session asks for one)
def default_plan(network: Network, data: Any = None) -> Plan:
    """The explorer's starting plan: :func:`~fxnet_widgets.core.starting.suggest_plan` on ``data``.

    ``data``: the session's image and samples (or None): relu/identity output formats keep
    their observed range plus a margin, every accumulator is at its guaranteed-safe width.
    """
    return suggest_plan(network, data)


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
    #: raised by every plan change, whatever its origin: the version page changes are stamped with
    plan_version = t.Int(0)

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
        if not isinstance(bins, int) or isinstance(bins, bool) or not 4 <= bins <= 4096:
            raise ValueError(f"bins must be an integer between 4 and 4096, not {bins!r}")
        self.network = network
        self.bins = bins
        #: the checked, read-only data (:class:`~fxnet_widgets.widgets.data.SessionData`)
        self.data = SessionData(
            network, image, samples, labels, image_labels=image_labels, slice_points=slice_points,
            cube_points=cube_points, preview_width=preview_width,
        )  # fmt: skip
        self.image_note = self.data.image_note
        self.cube_ok = self.data.cube_ok
        self.slice_codes = self.data.slice_codes
        self.cube_codes = self.data.cube_codes
        self._counter = BinCounter()
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
        #: page changes dropped because they were made on an older plan (see :meth:`page_change`)
        self.dropped_page_changes = 0
        #: ``time.monotonic()`` when the last update ended (the kernel reads the page's messages only after it)
        self.idle_since = time.monotonic()
        #: how long a browser change waits for newer ones before it is computed
        self.coalesce_seconds = coalesce_seconds
        #: how the starting plan was chosen, one note per layer (empty when a plan was given)
        self.start_notes: tuple[str, ...] = ()
        if plan is None:
            start = starting_plan(network, self._start_data())
            plan, self.start_notes = start.plan, tuple(start.notes)
        super().__init__(
            plan=plan.check(network),
            slice_red=mid, slice_green=mid, slice_blue=mid,
        )  # fmt: skip
        # first observer of the plan: every later one (the controls) sees the new version
        self.observe(self._bump_plan_version, names="plan")
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
        return self.data.image

    @property
    def samples(self) -> np.ndarray | None:
        return self.data.samples

    @property
    def labels(self) -> np.ndarray | None:
        """Labels of the samples (N,), or None."""
        return self.data.labels

    @property
    def image_labels(self) -> np.ndarray | None:
        """Labels of the full image (H x W), or None."""
        return self.data.image_labels

    @property
    def result(self) -> SessionResult:
        """The arrays every view shows now (the last update that worked).

        Reading it first computes a change still waiting in :meth:`deferred`.
        """
        self.flush()
        assert self._result is not None
        return self._result

    @property
    def last_result(self) -> SessionResult | None:
        """The last result computed, without computing a waiting change (None before the first)."""
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
    def _bump_plan_version(self, change: Any) -> None:
        self.plan_version += 1

    def _start_data(self) -> list[np.ndarray]:
        """The codes a starting plan keeps the observed range of: the image and the samples."""
        return [d for d in (self.data.image, self.data.samples) if d is not None]

    def _changed(self, change: Any) -> None:
        self._request()

    def page_change(self, fields: dict[str, Any], layers: Any, version: int) -> bool:
        """Apply a change a person made on the page: ``fields`` on ``layers`` of the current plan.

        ``version`` is the :attr:`plan_version` the control showed when the
        person moved it. A change made on an older state (``version`` below the
        current one) is dropped and counted in :attr:`dropped_page_changes`;
        otherwise the fields are set on the current plan (every other field and
        layer stays as it is now) and computed coalesced (see :meth:`deferred`).
        Returns whether the change was applied.
        """
        if not isinstance(version, int) or isinstance(version, bool):
            raise TypeError(f"version must be an integer plan version, not {version!r}")
        if version < self.plan_version:
            self.dropped_page_changes += 1
            return False
        plan = self.plan
        for li in layers:
            plan = plan.replace(layer=int(li), **fields)
        if plan != self.plan:
            with self.deferred():
                self.plan = plan
        return True

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
            self.idle_since = time.monotonic()

    def _part(self, name: str, key: Any, make: Callable[[], Any]) -> Any:
        old = self._parts.get(name)
        if old is not None and old[0] == key:
            return old[1]
        value = make()
        self._parts[name] = (key, value)
        return value

    def _compute(self, gen: int) -> SessionResult:
        net, plan, data = self.network, self.plan, self.data
        intnet = build_integer_network(net, plan)  # raises for a plan the kernel refuses
        image = samples = None
        if data.image is not None:
            image = self._part("image", (plan, self.full_resolution),
                               lambda: parts.image_part(data, plan, self.full_resolution))  # fmt: skip
        if data.samples is not None:
            samples = self._part("samples", plan, lambda: parts.samples_part(data, plan))
        slices = cube = None
        if self.cube_ok:
            pos = self.slice_positions
            decided = samples.fixed if samples is not None else None
            slices = self._part("slices", (plan, pos), lambda: parts.slices_part(data, plan, pos, decided))
            cube = self._part("cube", plan, lambda: parts.cube_part(data, plan))
        named = [(n, p) for n, p in ((f"image ({image.note})" if image else "image", image), ("samples", samples))
                 if p is not None]  # fmt: skip
        emus = [p.emulation for _, p in named]
        data_name = " + ".join(n.split(" ")[0] for n, _ in named)
        if not emus:
            if data.cube_input is None:
                raise ValueError("a session needs an image or samples for a network without 3 inputs")
            emus = [emulate(net, plan, data.cube_input)]
            data_name = "cube grid"
        key = (plan, self.full_resolution)
        neurons = self._part("neurons", key, lambda: neuron_results(emus, self.bins, self._counter))
        n_cls = len(net.classes)
        figures = self._part("figures", key, lambda: tuple(
            parts.data_figures(n, p.emulation, p.labels, n_cls) for n, p in named))  # fmt: skip
        cost = self._part("cost", plan, lambda: hardware_cost(net, plan))
        safe = tuple(max(1, int(L.safe_acc_bits.max())) for L in intnet.layers)
        return SessionResult(
            plan=plan, generation=gen, classes=tuple(net.classes), image=image, samples=samples, slices=slices,
            cube=cube, neurons=neurons, data_name=data_name, descriptions=tuple(L.describe() for L in intnet.layers),
            figures=figures, cost=cost, layer_safe_acc_bits=safe,
            kinds=tuple(layer_kind(L.activation) for L in net.layers),
        )  # fmt: skip

    #: ``session.use_network(net)``: compute with ``net`` from now on (same layout; :func:`.swap.use_network`)
    use_network = swap.use_network
    #: ``set_image(image, image_labels=None, note=None)``: another image, one update (:func:`.data.replace_image`)
    set_image = replace_image

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
        """Deterministic text: plan, safe widths, disagreements and events (:func:`~.text.summary_text`)."""
        return summary_text(self.result, self.error)
