"""Benchmark: the search panel's own overhead against a bare ``sweep``, and a pick against a slider change.

A sweep of 200 plans (layer 1: weight_bits 4..13 x table_bits 1..20, the rest of
the demo plan) on 20,000 labelled pixels of the test scene, in this process
(``SerialExecutor``) both times. Measured in one run, the kernel's caches emptied
before each timing so neither run profits from the other: the bare sweep (before
and after the panel, averaged), the panel's ``run(wait=True)`` (chunks, progress,
scatter updates), the largest gap between two scatter updates, then the time of
``panel.pick(i)`` (every explorer view and the panel's mark updated) against
setting a slider to a new value.

Targets (issue 16): panel overhead <= 10 % of the bare sweep; the scatter
updated at least every 0.5 s; a pick within the budget of a slider change.

The sweep runs in pieces sized by measured time (``PieceSizer`` in
``widgets/search_run.py``): about 0.1 s each, one plan at least.

Run: ``nice -n -5 python benchmarks/bench_search_panel.py`` (the load average is printed beside the figures)
"""

from __future__ import annotations

import os
import statistics
import time

from fxnet_widgets import labels_from_mask, read_image, sample_pixels, sweep
from fxnet_widgets.core.analysis.search import SerialExecutor
from fxnet_widgets.core.kernel import clear_caches
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.explorer import DEMO_ASSETS
from fxnet_widgets.widgets.search_panel import SearchPanel

GRID = {"weight_bits": list(range(4, 14)), "table_bits": list(range(1, 21))}


def load() -> str:
    """The 1/5/15-minute load averages (2 cores are shared: wall figures stretch with them; CPU figures less)."""
    return "load average " + " / ".join(f"{v:.2f}" for v in os.getloadavg()) + f" on {os.cpu_count()} cores"


def main() -> None:
    print(load())
    ex = Explorer.demo()
    net = ex.session.network
    test = read_image(DEMO_ASSETS / "scene-test.png")
    pixels = labels_from_mask(test, read_image(DEMO_ASSETS / "scene-test-mask.png"), classes=tuple(net.classes))
    split = sample_pixels(pixels, 40000, validation=0.5, seed=0)
    codes, labels = split.train_codes, split.train_labels
    base = ex.plan
    print(f"{len(GRID['weight_bits']) * len(GRID['table_bits'])} plans on {codes.shape[0]} labelled pixels")

    def bare() -> tuple[float, float]:
        clear_caches()
        t0, c0 = time.perf_counter(), time.process_time()
        recs = sweep(net, codes, GRID, base=base, layer=0, labels=labels, executor=SerialExecutor())
        took = time.perf_counter() - t0, time.process_time() - c0
        bare.records = recs  # type: ignore[attr-defined]
        return took

    panel = SearchPanel(ex, GRID, codes=codes, labels=labels, executor=SerialExecutor())
    draws: list[float] = []
    redraw = panel.redraw

    def timed_redraw() -> None:
        draws.append(time.perf_counter())
        redraw()

    panel.redraw = timed_redraw  # type: ignore[method-assign]
    bares, runs, gaps = [], [], []
    for _ in range(2):  # alternated, so both see the same machine state; the faster of each is printed
        bares.append(bare())
        clear_caches()
        draws.clear()
        t0, c0 = time.perf_counter(), time.process_time()
        panel.run(wait=True)
        runs.append((time.perf_counter() - t0, time.process_time() - c0))
        gaps.append(max(b - a for a, b in zip([t0, *draws], draws)))
        print(f"  round {len(runs)}: {len(draws)} scatter updates, largest gap {gaps[-1]:.3f} s; {load()}")
        assert panel.records == bare.records, "the panel's records must equal the bare sweep's"  # type: ignore[attr-defined]
    print("bare sweep (wall / CPU): " + ", ".join(f"{t:.3f} / {c:.3f} s" for t, c in bares))
    print("panel run (wall / CPU):  " + ", ".join(f"{t:.3f} / {c:.3f} s" for t, c in runs) +
          f" ({len(draws)} scatter updates per run)")  # fmt: skip
    print("largest gap between scatter updates: " + ", ".join(f"{g:.3f} s" for g in gaps) + " (target <= 0.5 s)")
    print(load())
    for k, what in ((0, "wall"), (1, "CPU")):
        t_bare, t_panel = min(b[k] for b in bares), min(r[k] for r in runs)
        print(f"panel overhead ({what} time, fastest of each): {100 * (t_panel / t_bare - 1):+.1f} % of the bare "
              "sweep (target <= 10 %)")

    # a pick against a slider change (distinct plans, so no plan cache helps either)
    picks, slides = [], []
    ok = [i for i, r in enumerate(panel.records) if r.ok]
    slider = ex.controls.sliders["acc_bits"]
    for k in range(10):
        t0 = time.perf_counter()
        panel.pick(ok[(37 * k + 11) % len(ok)])
        picks.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        slider.value = 24 + k
        slides.append(time.perf_counter() - t0)
    mp, ms = statistics.median(picks), statistics.median(slides)
    print(f"pick: median {1000 * mp:.1f} ms; slider change: median {1000 * ms:.1f} ms; ratio {mp / ms:.2f}")
    print(load())


if __name__ == "__main__":
    main()
