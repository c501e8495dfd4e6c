"""The search in the notebook: a live cost / disagreement scatter linked to an explorer.

:class:`SearchPanel` runs :func:`~fxnet_widgets.core.analysis.sweep` (in chunks)
or :func:`~fxnet_widgets.core.analysis.tune` in a background thread and draws the
records as they arrive; clicking a point (or :meth:`SearchPanel.pick`) loads that
plan into the explorer, and the explorer's current plan is marked on the scatter.

>>> from fxnet_widgets import Explorer, SearchPanel     # doctest: +SKIP
>>> ex = Explorer.demo()                               # doctest: +SKIP
>>> panel = SearchPanel(ex)                            # doctest: +SKIP
>>> panel.run(wait=True); print(panel.summary())       # doctest: +SKIP
>>> panel.pick(panel.records.index(panel.front[-1]))   # doctest: +SKIP
"""

from __future__ import annotations

import concurrent.futures as cf
import html
import threading
import time
from dataclasses import replace
from typing import Any

import ipywidgets as w
import numpy as np

from ..core.analysis import (
    COST_KEYS,
    SerialExecutor,
    SweepRecord,
    TuneResult,
    error_metrics,
    hardware_cost,
    pareto_front,
    sweep,
    tune,
)
from ..core.kernel import emulate
from ..core.plan import Plan
from .background import BackgroundRun
from .search_grid import GridEditor, grid_size, sub_grid
from .search_plot import TradeOffFigure, moves_html
from .search_run import (
    EVENT_CLASSES,
    PieceSizer,
    RecordingExecutor,
    StopRequested,
    dominance_front,
    event_class,
    plan_q,
    rate_text,
    record_html,
    search_data,
    tune_path,
)  # fmt: skip

__all__ = ["SearchPanel"]

_Y = {"mismatch": "decisions differing from float (%)", "accuracy": "accuracy on labels (%)"}


def _x_of(r: SweepRecord, key: str) -> float:
    """A record's cost total ``key`` (every total is in ``r.costs``; ``r.cost`` is the run's)."""
    return float(r.costs.get(key, r.cost) if r.costs else r.cost)  # type: ignore[arg-type]


def _y_of(r: SweepRecord, accuracy: bool) -> float:
    """Accuracy on labels or disagreement with float, in percent."""
    return 100.0 * float((r.accuracy if accuracy else r.mismatch_fraction) or 0.0)


class SearchPanel(BackgroundRun, w.VBox):
    """Grid editor, budget, cost, sweep / tune / stop, progress, and the linked scatter.

    ``stop()`` ends the run after the task in progress (its finished records are kept).

    Parameters
    ----------
    explorer
        The :class:`~fxnet_widgets.widgets.explorer.Explorer` whose plan a click sets.
    grid
        ``{plan field: values}`` or a grid string (``"weight_bits=4:8"``); default:
        a small grid around the explorer's current plan on layer 1.
    budget
        Fraction of decisions that may differ from float (``tune``'s ``max_mismatch``,
        drawn as a line); default 0.001.
    cost
        The cost total on the x axis (one of ``COST_KEYS``, as ``fxnet sweep --cost``).
    labels
        A :class:`~fxnet_widgets.core.labels.LabelledPixels` (its codes and labels are
        the data), labels for ``codes``, or None: the explorer's samples and labels
        (or, without samples, its image and image labels).
    executor
        Runs the plans (any ``concurrent.futures.Executor``); default: this process,
        in the panel's background thread.
    codes
        The input codes to search on (default: the explorer's data, see ``labels``).
    layer
        The layer the grid changes (0-based; None: every layer).
    chunk_seconds
        About how long one piece of a sweep runs (wall time; the scatter is redrawn after each;
        see :class:`~fxnet_widgets.widgets.search_run.PieceSizer`).
    """

    def __init__(self, explorer: Any, grid: Any = None, *, budget: float | None = None, cost: str = "total_bits",
                 labels: Any = None, executor: Any = None, codes: Any = None, layer: int | None = 0,
                 chunk_seconds: float = 0.1) -> None:  # fmt: skip
        session = explorer.session
        self.explorer = explorer
        self.network = session.network
        self.codes, self.labels = search_data(session, codes, labels)
        if cost not in COST_KEYS:
            raise ValueError(f"cost must be one of {', '.join(COST_KEYS)}, not {cost!r}")
        budget = 0.001 if budget is None else budget
        if isinstance(budget, bool) or not isinstance(budget, (int, float)) or not 0 <= budget <= 1:
            raise ValueError(f"budget must be a fraction between 0 and 1, not {budget!r}")
        if executor is not None and not isinstance(executor, cf.Executor):
            raise TypeError(f"executor must be a concurrent.futures.Executor, not {type(executor).__name__}")
        self.executor: cf.Executor = executor if executor is not None else SerialExecutor()
        self.chunk_seconds = float(chunk_seconds)
        self.editor = GridEditor(self.network, explorer.plan, grid, layer)
        self.budget_box = w.BoundedFloatText(value=float(budget), min=0.0, max=1.0, step=0.0005, description="budget")
        self.cost_box = w.Dropdown(options=list(COST_KEYS), value=cost, description="cost")
        y_opts = [("disagreement with float", "mismatch")]
        if self.labels is not None:
            y_opts.append(("accuracy on labels", "accuracy"))
        self.y_box = w.Dropdown(options=y_opts, value="mismatch", description="y axis")
        self.sweep_button = w.Button(description="sweep", button_style="primary")
        self.tune_button = w.Button(description="tune")
        self.stop_button = w.Button(description="stop", disabled=True, button_style="warning")
        self.sweep_button.on_click(lambda _b: self._clicked_run(self.run))
        self.tune_button.on_click(lambda _b: self._clicked_run(self.tune))
        self.stop_button.on_click(lambda _b: self.stop())
        self.progress = w.IntProgress(value=0, min=0, max=1, description="plans")
        self.rate = w.Label("")
        self.status = w.HTML("")
        self.hovered = w.HTML("")
        self.picked_label = w.HTML("")
        self.picked_label.add_class("fxnet-search-picked")
        self.moves = w.HTML("")
        self._build_figure()
        for box in (self.cost_box, self.y_box, self.budget_box):
            box.observe(lambda _c: self.redraw(), names="value")
        controls = w.VBox([self.editor, w.HBox([self.budget_box, self.cost_box, self.y_box]),
                           w.HBox([self.sweep_button, self.tune_button, self.stop_button]),
                           w.HBox([self.progress, self.rate]), self.status])  # fmt: skip
        super().__init__([controls, self.figure, self.hovered, self.picked_label, self.moves])
        self.add_class("fxnet-search")
        self._lock = threading.RLock()
        self._records: list[SweepRecord] = []
        self._init_run()
        self._drawn_at = 0.0
        self._current: dict[tuple[Plan, str], tuple[float, float | None, float | None]] = {}
        self._metas: dict[int, tuple[SweepRecord, str, str]] = {}
        #: the :class:`TuneResult` of the last tune (None after a sweep)
        self.tune_result: TuneResult | None = None
        #: the tune's path: the start and each accepted move's record
        self.path: list[SweepRecord] = []
        #: what the last run was ("sweep" / "tune"), and its one-line error ("" when it worked)
        self.kind = ""
        self.error = ""
        #: the index into :attr:`records` last picked (or None)
        self.picked: int | None = None
        explorer.last_search = self  # the report's search section reads it (report/_search.py)
        self._shown_plan: Plan = session.result.plan
        session.observe(self._session_updated, names="version")
        self._mark_current()

    # -- data ---------------------------------------------------------------------------
    # -- state ---------------------------------------------------------------------------
    @property
    def records(self) -> list[SweepRecord]:
        """Every record of the last run so far (``sweep``'s records, in grid order; a tune's in evaluation order)."""
        with self._lock:
            return list(self._records)

    @property
    def front(self) -> list[SweepRecord]:
        """:func:`~fxnet_widgets.core.analysis.pareto_front` of :attr:`records`."""
        return pareto_front(self.records)

    def _x(self, r: SweepRecord) -> float:
        return _x_of(r, self.cost_box.value)

    # -- running -------------------------------------------------------------------------
    def run(self, wait: bool = False) -> None:
        """Sweep the editor's grid from the explorer's current plan (``wait``: here and now, else in the background)."""
        grid = self._checked_grid()
        base, layer = self.explorer.plan, self.editor.layer_index
        options = {"base": base, "layer": layer, "labels": self.labels, "cost": self.cost_box.value,
                   "safe_acc": self.editor.safe_acc.value, "keep_range": self.editor.keep_range.value}  # fmt: skip
        self._start("sweep", lambda: self._sweep(grid, options), wait)

    def run_sweep(self, wait: bool = False) -> None:
        """Same as :meth:`run` (the sweep button)."""
        self.run(wait)

    def tune(self, wait: bool = False) -> None:
        """``tune`` to the budget from its generous start plan, drawing the records and the path of accepted moves."""
        budget, cost = float(self.budget_box.value), self.cost_box.value
        self._start("tune", lambda: self._tune(budget, cost), wait)

    def _checked_grid(self) -> dict[str, list[Any]]:
        try:
            return self.editor.grid
        except ValueError as exc:
            self._show_status(f"refused: {exc}", bad=True)
            raise

    def _clicked_run(self, start: Any) -> None:
        try:
            start()
        except (ValueError, RuntimeError):
            pass  # the reason is on the panel already

    def _start(self, kind: str, job: Any, wait: bool) -> None:
        if self._running:
            self._show_status("refused: a run is in progress (stop it first)", bad=True)
            raise RuntimeError("a run must end before the next starts, not overlap it")
        self._running = True
        self._stop.clear()
        self.kind, self.error, self.tune_result, self.path = kind, "", None, []
        with self._lock:
            self._records = []
        self._metas = {}
        self.moves.value = ""
        self._t0 = time.perf_counter()
        self.sweep_button.disabled = self.tune_button.disabled = True
        self.stop_button.disabled = False
        self._show_status(f"{kind} running")
        if wait:
            self._guard(job)
        else:
            self._thread = threading.Thread(target=self._guard, args=(job,), name=f"fxnet-{kind}", daemon=True)
            self._thread.start()

    def _guard(self, job: Any) -> None:
        try:
            job()
        except StopRequested:
            self._stop.set()
        except Exception as exc:  # a failing run shows on the panel and ends only itself
            msg = str(exc).splitlines()[0] if str(exc) else ""
            self.error = f"{type(exc).__name__}: {msg}"
        finally:
            self._running = False
            self.sweep_button.disabled = self.tune_button.disabled = False
            self.stop_button.disabled = True
            self.redraw()
            self._finish_status()

    def _finish_status(self) -> None:
        n = len(self.records)
        refused = sum(not r.ok for r in self.records)
        if self.error:
            self._show_status(f"{self.kind} ended by an error after {n} plans (kept): {self.error}", bad=True)
        elif self._stop.is_set():
            self._show_status(f"{self.kind} stopped: {n} finished plans kept" +
                              (" (a stopped tune has no answer)" if self.kind == "tune" else ""))  # fmt: skip
        else:
            self._show_status(f"{self.kind} done: {n} plans ({refused} refused), {len(self.front)} on the front")

    def _show_status(self, text: str, bad: bool = False) -> None:
        colour = "#b00020" if bad else "#2d6a2d"
        self.status.value = f"<span style='color:{colour};font-family:monospace'>{html.escape(text)}</span>"

    def _set_progress(self, done: int, total: int | None) -> None:
        self.progress.max = max(1, total if total is not None else done)
        self.progress.value = min(done, self.progress.max)
        self.rate.value = rate_text(done, total, time.perf_counter() - self._t0)

    def _sweep(self, grid: dict[str, list[Any]], options: dict[str, Any]) -> None:
        total, pos = grid_size(grid), 0
        sizer = PieceSizer(self.network, grid, options["base"], options["layer"], options["keep_range"],
                           self.codes.size // self.network.n_in, self.chunk_seconds)  # fmt: skip
        self._set_progress(0, total)
        while pos < total and not self._stop.is_set():
            sub = sub_grid(grid, pos, sizer.next_size(pos))
            n = grid_size(sub)
            t0 = time.perf_counter()
            got = sweep(self.network, self.codes, sub, executor=self.executor, **options)
            sizer.finished(pos, n, time.perf_counter() - t0)
            self._add([replace(r, index=r.index + pos) for r in got])
            pos += n
            self._set_progress(pos, total)

    def _tune(self, budget: float, cost: str) -> None:
        rounds = [0]

        def progress(done: int, total: int) -> None:
            if done == 0:
                rounds[0] += 1
            self._set_progress(done, total)
            spent = time.perf_counter() - self._t0
            self.rate.value = f"round {rounds[0]}: " + rate_text(len(self._records), None, spent)

        live = RecordingExecutor(self.executor, self._add, self._stop)
        result = tune(self.network, self.codes, budget, labels=self.labels, cost=cost, executor=live,
                      progress=progress)  # fmt: skip
        with self._lock:
            self._records = list(result.records)
        self.tune_result = result
        try:
            self.path = tune_path(self.network, result)
        except ValueError as exc:
            self.path = []
            self.error = f"path: {exc}"
        self.moves.value = moves_html(result, self.codes)

    def _add(self, records: Any) -> None:
        with self._lock:
            self._records.extend(records)
            if self.kind == "tune":
                self._records.sort(key=lambda r: r.index)
        now = time.perf_counter()
        if now - self._drawn_at >= 0.05:
            self.redraw()

    # -- picking -------------------------------------------------------------------------
    def pick(self, i: int) -> Plan:
        """Load ``records[i]``'s plan into the explorer (every linked view shows it); returns the plan."""
        recs = self.records
        if isinstance(i, bool) or not isinstance(i, (int, np.integer)) or not -len(recs) <= i < len(recs):
            raise IndexError(f"i must be an index into panel.records (0 to {len(recs) - 1}), not {i!r}")
        rec = recs[int(i)]
        if not rec.ok:
            raise ValueError(f"records[{int(i)}] must be an evaluated plan, not a refused one ({rec.error})")
        self.picked = int(i) % len(recs)
        self.explorer.plan = rec.plan
        self.picked_label.value = "picked: " + self._describe(rec, self.picked)
        return rec.plan

    def _on_click(self, cls: str, content: dict[str, Any]) -> None:
        k = int(content.get("data", {}).get("index", -1))
        idx = self._index.get(cls, [])
        if 0 <= k < len(idx):
            self.pick(idx[k])

    def _on_hover(self, cls: str, content: dict[str, Any]) -> None:
        k = int(content.get("data", {}).get("index", -1))
        idx = self._index.get(cls, [])
        if 0 <= k < len(idx):
            self.hovered.value = self._describe(self.records[idx[k]], idx[k])

    def _describe(self, r: SweepRecord, i: int) -> str:
        return record_html(self.network, r, i, self.cost_box.value, self._x(r), event_class(r, self._relu))

    # -- drawing -------------------------------------------------------------------------
    def _build_figure(self) -> None:
        self._relu = any(L.activation == "relu" for L in self.network.layers)
        self._index: dict[str, list[int]] = {c: [] for c in EVENT_CLASSES}
        self.plot = TradeOffFigure(self._on_click, self._on_hover, self.cost_box.value, _Y["mismatch"])
        p = self.plot
        self.figure, self.points, self.current = p.figure, p.points, p.current
        self.x_axis, self.y_axis = p.x_axis, p.y_axis
        self.front_line, self.path_line, self.budget_line = p.front_line, p.path_line, p.budget_line

    def redraw(self) -> None:
        """Draw the records, the front, the path, the budget and the explorer's plan (also after a chooser change)."""
        self._drawn_at = time.perf_counter()
        recs = self.records
        ok = [(i, r) for i, r in enumerate(recs) if r.ok]
        acc = self.y_box.value == "accuracy"
        key = self.cost_box.value
        xy = {id(r): (_x_of(r, key), _y_of(r, acc)) for _, r in ok}
        front = dominance_front(recs, lambda r: xy[id(r)][0], lambda r: -xy[id(r)][1] if acc else xy[id(r)][1])
        path = [_x_of(r, key) for r in self.path], [_y_of(r, acc) for r in self.path]
        with self.figure.hold_sync():
            meta = [self._meta(r) for _, r in ok]
            for cls, m in self.points.items():
                sel = [(i, xy[id(r)], name) for (i, r), (c, name) in zip(ok, meta) if c == cls]
                self._index[cls] = [i for i, _, _ in sel]
                with m.hold_sync():
                    m.names = np.array([name for _, _, name in sel], dtype=str)
                    self.plot.set_xy(m, [p[0] for _, p, _ in sel], [p[1] for _, p, _ in sel])
            self.plot.set_xy(self.front_line, [xy[id(r)][0] for r in front], [xy[id(r)][1] for r in front])
            self.plot.set_xy(self.path_line, *path)
            if xy and not acc:
                xs = [p[0] for p in xy.values()]
                b = 100.0 * float(self.budget_box.value)
                self.plot.set_xy(self.budget_line, [min(xs), max(xs)], [b, b])
            else:
                self.plot.set_xy(self.budget_line, [], [])
            self.x_axis.label = key
            self.y_axis.label = _Y[self.y_box.value]
        self._mark_current()

    def _meta(self, r: SweepRecord) -> tuple[str, str]:
        """(event class, plan in Q notation on one line) of a record, computed once per record."""
        got = self._metas.get(id(r))
        if got is None or got[0] is not r:
            got = (r, event_class(r, self._relu), plan_q(self.network, r.plan).replace("\n", " | "))
            self._metas[id(r)] = got
        return got[1], got[2]

    def _session_updated(self, _change: Any) -> None:
        self._shown_plan = self.explorer.session.result.plan
        self._mark_current()

    def current_point(self) -> tuple[float, float]:
        """(x, y) of the plan the explorer shows, on the scatter (computed on the panel's data)."""
        plan, key = self._shown_plan, self.cost_box.value
        got = self._current.get((plan, key))
        if got is None:
            m = error_metrics(emulate(self.network, plan, self.codes), self.labels)
            got = (float(hardware_cost(self.network, plan).value(key)), m.mismatch_fraction, m.accuracy)
            if len(self._current) > 64:
                self._current.clear()
            self._current[(plan, key)] = got
        y = got[2] if self.y_box.value == "accuracy" else got[1]
        return got[0], 100.0 * float(y or 0.0)

    def _mark_current(self) -> None:
        x, y = self.current_point()
        self.plot.set_xy(self.current, [x], [y])

    def summary(self) -> str:
        """Deterministic text: what ran, how many plans, and the front (for notebooks and reports)."""
        recs = self.records
        if not recs:
            return "search: no records yet"
        cost = recs[0].cost_key
        lines = [f"{self.kind} of {len(recs)} plans ({sum(not r.ok for r in recs)} refused); "
                 f"Pareto front by {cost} and mismatch:"]  # fmt: skip
        for r in self.front:
            lines.append(f"  records[{recs.index(r)}] {dict(r.settings)}: {cost} {r.cost}, mismatch {r.mismatch}, "
                         f"{event_class(r, self._relu)}")  # fmt: skip
        if self.tune_result is not None:
            lines.append(f"tune path: {len(self.path)} plans; answer {self.tune_result.plan!r}")
        if self.error:
            lines.append(f"error: {self.error}")
        return "\n".join(lines)
