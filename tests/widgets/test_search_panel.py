"""The search panel without a browser: its records, front, scatter and picks against sweep, tune and the kernel."""

from __future__ import annotations

import concurrent.futures as cf
import itertools

import pytest
from widget_checks import assert_explorer_matches_kernel

from fxnet_widgets import sweep, tune
from fxnet_widgets.core.analysis import error_metrics, hardware_cost
from fxnet_widgets.core.analysis.search import SerialExecutor
from fxnet_widgets.core.formats import q_notation
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.search_grid import grid_size, sub_grids
from fxnet_widgets.widgets.search_panel import SearchPanel

GRID = {"weight_bits": [4, 7, 10], "table_bits": [6, 9], "acc_overflow": ["wrap", "saturate"]}


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


def direct_sweep(ex, grid, layer=0):
    s = ex.session
    return sweep(s.network, s.samples, grid, base=ex.plan, layer=layer, labels=s.labels, executor=SerialExecutor())


def brute_force_front(records):
    """Pareto dominance (common practice): a point is on the front when no other is at least as good in
    both cost and mismatch and better in one; of equal points the first stands for all."""
    ok = [r for r in records if r.ok]
    out = []
    for r in ok:
        dominated = any(o.cost <= r.cost and o.mismatch <= r.mismatch and (o.cost, o.mismatch) != (r.cost, r.mismatch)
                        for o in ok)  # fmt: skip
        first_equal = all(o.index >= r.index for o in ok if (o.cost, o.mismatch) == (r.cost, r.mismatch))
        if not dominated and first_equal:
            out.append(r)
    return sorted(out, key=lambda r: r.cost)


def test_sub_grids_cover_the_product_in_order():
    full = list(itertools.product(*GRID.values()))
    for target in range(1, grid_size(GRID) + 2):
        got = []
        for start, sub in sub_grids(GRID, target):
            assert start == len(got) and grid_size(sub) <= target
            got += list(itertools.product(*sub.values()))
        assert got == full


@pytest.mark.parametrize("chunk_seconds", [0.0, 10.0])
def test_records_are_the_records_of_sweep(explorer, chunk_seconds):
    panel = SearchPanel(explorer, GRID, chunk_seconds=chunk_seconds)
    panel.run(wait=True)
    want = direct_sweep(explorer, GRID)
    assert panel.records == want  # the same records (values, settings, indices) sweep gives in one call
    assert panel.front == brute_force_front(want)
    assert panel.progress.max == panel.progress.value == len(want) == 12
    assert panel.rate.value.startswith("12/12 plans, ")
    assert panel.error == "" and "sweep done: 12 plans (0 refused)" in panel.status.value


def test_scatter_holds_every_record_by_event_class(explorer):
    panel = SearchPanel(explorer, GRID)
    panel.run(wait=True)
    recs = panel.records
    shown = []
    for cls, mark in panel.points.items():
        for k, i in enumerate(panel._index[cls]):
            r = recs[i]
            ev = r.events
            want = (
                "overflow"
                if ev["acc_overflow"]
                else (
                    "clamps"
                    if ev["table_low"] + ev["table_high"] + ev["weight_clip"] + ev["bias_clip"]
                    else "no events"
                )
            )
            assert cls == want
            assert mark.x[k] == r.cost and mark.y[k] == pytest.approx(100 * r.mismatch / 60)  # 60 samples
            lp = r.plan.layers[0]
            assert q_notation(lp.weight_bits, lp.weight_frac) in mark.names[k]
            shown.append(i)
    assert sorted(shown) == [i for i, r in enumerate(recs) if r.ok]
    front = brute_force_front(recs)
    assert panel.front_line.x.tolist() == [r.cost for r in front]
    assert panel.front_line.y.tolist() == pytest.approx([100 * r.mismatch / 60 for r in front])


def test_pick_loads_the_plan_and_every_view_follows(explorer):
    panel = SearchPanel(explorer, GRID)
    panel.run(wait=True)
    i = panel.records.index(panel.front[0])
    assert panel.pick(i) == panel.records[i].plan
    assert explorer.plan == panel.records[i].plan
    assert_explorer_matches_kernel(explorer)
    # the explorer's plan is marked where an independent evaluation puts it
    s = explorer.session
    m = error_metrics(emulate(s.network, explorer.plan, s.samples), s.labels)
    assert panel.current.x.tolist() == [hardware_cost(s.network, explorer.plan).total_bits]
    assert panel.current.y.tolist() == pytest.approx([100 * m.mismatch / 60])
    # a click on a point (the message bqplot's front end sends) picks it too
    cls = next(c for c, idx in panel._index.items() if len(idx) > 1)
    mark = panel.points[cls]
    mark._handle_custom_msgs(None, {"event": "element_click", "data": {"index": 1}})
    assert explorer.plan == panel.records[panel._index[cls][1]].plan
    assert panel.picked == panel._index[cls][1]
    assert_explorer_matches_kernel(explorer)
    mark._handle_custom_msgs(None, {"event": "hover", "data": {"index": 0}})
    lp = panel.records[panel._index[cls][0]].plan.layers[1]
    assert q_notation(lp.weight_bits, lp.weight_frac) in panel.hovered.value


def test_the_mark_moves_with_the_sliders(explorer):
    panel = SearchPanel(explorer, GRID)
    explorer.controls.sliders["weight_bits"].value = 6
    s = explorer.session
    assert all(lp.weight_bits == 6 for lp in explorer.plan.layers)
    m = error_metrics(emulate(s.network, explorer.plan, s.samples), s.labels)
    assert panel.current.x.tolist() == [hardware_cost(s.network, explorer.plan).total_bits]
    assert panel.current.y.tolist() == pytest.approx([100 * m.mismatch / 60])
    panel.cost_box.value = "adders"
    assert panel.current.x.tolist() == [hardware_cost(s.network, explorer.plan).adders]


def test_stop_keeps_the_finished_records(explorer):
    want = direct_sweep(explorer, GRID)
    panel = SearchPanel(explorer, GRID, chunk_seconds=0.0)  # one plan per chunk

    def stop_at_three(change):
        if change["new"] >= 3:
            panel.stop()

    panel.progress.observe(stop_at_three, names="value")
    panel.run(wait=True)
    assert panel.records == want[:3]
    assert panel.progress.value == 3 and panel.progress.max == 12
    assert "sweep stopped: 3 finished plans kept" in panel.status.value
    assert not panel.running and not panel.sweep_button.disabled and panel.stop_button.disabled


def test_background_run_and_stop(explorer, monkeypatch):
    import threading

    import fxnet_widgets.widgets.search_panel as panel_module

    want = direct_sweep(explorer, GRID)
    panel = SearchPanel(explorer, GRID, chunk_seconds=0.0)
    # hold the background run after its first piece, so "stop" lands mid-run on every machine
    first_done, release, real = threading.Event(), threading.Event(), panel_module.sweep

    def gated(*args, **kwargs):
        out = real(*args, **kwargs)
        if not first_done.is_set():
            first_done.set()
            release.wait(30)
        return out

    monkeypatch.setattr(panel_module, "sweep", gated)
    panel.run()
    assert first_done.wait(30)
    panel.stop()
    release.set()
    assert panel.join(30)
    n = len(panel.records)
    assert 0 < n < 12 and panel.records == want[:n]
    monkeypatch.undo()
    panel.run()
    assert panel.join(60) and panel.records == want


def test_an_impossible_grid_is_refused_next_to_the_field(explorer):
    panel = SearchPanel(explorer, GRID)
    row = panel.editor.rows[0]
    row.values.value = "0:3"
    assert "weight_bits values must be between 1 and 32, not 0" in row.error.value
    with pytest.raises(ValueError, match=r"^grid row 1: weight_bits values must be between 1 and 32, not 0$"):
        panel.run(wait=True)
    assert "refused: grid row 1" in panel.status.value and panel.records == []
    row.values.value = "8:4"
    assert "must not be empty" in row.error.value
    row.values.value = "4|7|10"
    assert row.error.value == "" and panel.editor.count.value == "12 plans"


class FailingExecutor(cf.Executor):
    def __init__(self, exc):
        self.exc = exc

    def submit(self, fn, /, *args, **kwargs):
        raise self.exc


def test_a_failing_worker_ends_only_that_run(explorer):
    panel = SearchPanel(explorer, GRID, executor=FailingExecutor(RuntimeError("worker lost")))
    panel.run(wait=True)
    assert panel.error == "RuntimeError: worker lost"
    assert "sweep ended by an error after 0 plans (kept): RuntimeError: worker lost" in panel.status.value
    assert not panel.running and not panel.sweep_button.disabled
    panel.executor = SerialExecutor()
    panel.run(wait=True)
    assert panel.error == "" and len(panel.records) == 12


def test_an_interrupt_leaves_the_panel_usable(explorer):
    panel = SearchPanel(explorer, GRID, executor=FailingExecutor(KeyboardInterrupt()))
    with pytest.raises(KeyboardInterrupt):
        panel.run(wait=True)
    assert not panel.running and not panel.sweep_button.disabled and panel.stop_button.disabled


def test_tune_shows_its_path(explorer):
    s = explorer.session
    panel = SearchPanel(explorer, budget=0.05)
    panel.tune(wait=True)
    want = tune(s.network, s.samples, 0.05, labels=s.labels, executor=SerialExecutor())
    assert panel.records == list(want.records)
    assert panel.tune_result.plan == want.plan and panel.tune_result.steps == want.steps
    assert panel.path[0].plan == want.start and panel.path[-1].plan == want.plan
    assert [(r.cost, r.mismatch) for r in panel.path[1:]] == [(st.cost, st.mismatch) for st in want.steps]
    assert panel.path_line.x.tolist() == [r.cost for r in panel.path]
    assert panel.moves.value.count("<tr>") == len(want.steps) + 2  # head row, start, one per move
    panel.pick(panel.records.index(panel.path[-1]))
    assert explorer.plan == want.plan
    assert_explorer_matches_kernel(explorer)


def test_bad_arguments(explorer):
    with pytest.raises(ValueError, match=r"^cost must be one of total_bits, .*, not 'area'$"):
        SearchPanel(explorer, cost="area")
    with pytest.raises(ValueError, match=r"^budget must be a fraction between 0 and 1, not 2$"):
        SearchPanel(explorer, budget=2)
    panel = SearchPanel(explorer, GRID)
    with pytest.raises(IndexError, match=r"^i must be an index into panel.records \(0 to -1\), not 0$"):
        panel.pick(0)


def test_every_layer_grid(explorer):
    panel = SearchPanel(explorer, {"weight_bits": [5, 7]}, layer=None)
    assert panel.editor.layer.value == -1 and panel.editor.layer.label == "every layer"
    assert panel.editor.layer_index is None
    panel.run(wait=True)
    assert panel.records == direct_sweep(explorer, {"weight_bits": [5, 7]}, layer=None)
    assert all(lp.weight_bits == 5 for lp in panel.records[0].plan.layers)


def test_stopping_a_tune_keeps_its_records(explorer):
    s = explorer.session
    full = tune(s.network, s.samples, 0.05, labels=s.labels, executor=SerialExecutor())
    panel = SearchPanel(explorer, budget=0.05)
    rounds = []

    def stop_after_two_rounds(change):
        if change["new"] == 0:  # a round starts
            rounds.append(1)
            if len(rounds) == 3:
                panel.stop()

    panel.progress.observe(stop_after_two_rounds, names="value")
    panel.tune(wait=True)
    n = len(panel.records)
    assert 0 < n < len(full.records)
    assert panel.records == list(full.records[:n])  # the finished records, as the full tune evaluated them
    assert panel.tune_result is None and panel.path == []
    assert "tune stopped: " in panel.status.value and "(a stopped tune has no answer)" in panel.status.value


def test_sliders_move_while_a_background_sweep_runs(explorer):
    """The notebook stays usable: the explorer computes in this thread while the sweep runs in its own."""
    base = explorer.plan
    panel = SearchPanel(explorer, GRID, chunk_seconds=0.0)
    panel.run()
    k = 0
    while True:  # at least one change, more while the run lasts
        explorer.controls.sliders["acc_bits"].value = 12 + k % 6
        k += 1
        if not panel.running:
            break
    assert panel.join(60) and panel.error == "" and explorer.session.error == ""
    s = explorer.session
    want = sweep(s.network, s.samples, GRID, base=base, layer=0, labels=s.labels, executor=SerialExecutor())
    assert panel.records == want
    assert_explorer_matches_kernel(explorer)


def test_pieces_are_sized_by_expected_work(fruit_net, fruit_plan):
    """A table of T address bits holds 2**T entries per neuron (the contract's table, semantics.md): a piece of
    wide-table plans holds fewer plans than one of narrow-table plans at the same measured rate."""
    from fxnet_widgets.widgets.search_run import TABLE_ENTRIES_PER_SAMPLE, PieceSizer, plan_work

    grid = {"table_bits": [4, 5, 6, 16, 17, 18]}
    sizer = PieceSizer(fruit_net, grid, fruit_plan, 0, False, 1000, seconds=0.1)
    n_out = fruit_net.layers[0].n_out
    tail = sum(L.n_out << lp.table_bits for lp, L in zip(fruit_plan.layers[1:], fruit_net.layers[1:]))
    want = [1000 + ((n_out << t) + tail) / TABLE_ENTRIES_PER_SAMPLE for t in grid["table_bits"]]
    assert sizer.work == pytest.approx(want)
    assert plan_work(fruit_net, None, 1000) == 1.0  # a refused plan: next to nothing
    assert sizer.next_size(0) == 1  # nothing measured yet: one plan
    sizer.finished(0, 1, 0.1 * want[0] / (want[0] + want[1] + want[2]))  # a rate that fits three narrow plans
    assert sizer.next_size(1) == 2  # plans 1 and 2 fit, plan 3 (a wider table) does not
    assert sizer.next_size(3) == 1  # a wide plan alone
    rate = sizer.rate
    sizer.finished(3, 1, 10 * rate * want[3])  # ten times slower than expected: taken at once
    assert sizer.rate == pytest.approx(10 * rate)
