"""The report's static charts: the live widget's colours and meanings, real values, no piled-up labels.

Also the zero-events picture, the wrapping of the summary blocks and the alignment of table cells.
"""

from __future__ import annotations

import base64
import io
import re
from pathlib import Path

import numpy as np
import pytest
from bs4 import BeautifulSoup
from PIL import Image

from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.render import bar_chart_png, histogram_png
from fxnet_widgets.render.charts import (
    ACC_RANGE_COLOUR,
    EVENT_STYLES,
    HISTOGRAM_COLOUR,
    NO_EVENTS_TEXT,
    TABLE_WINDOW_COLOUR,
    nice_ticks,
    tick_label,
)
from fxnet_widgets.render.palette import hex_colour
from fxnet_widgets.report import report_html
from fxnet_widgets.report._static import table_html
from fxnet_widgets.widgets.events import BAR_EVENTS
from fxnet_widgets.widgets.explorer import Explorer

ASSETS = Path(__file__).resolve().parents[2] / "assets"


def _decode(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))


def _img(fig) -> np.ndarray:
    return _decode(base64.b64decode(fig.find("img")["src"].split(",", 1)[1]))


def _columns_with(pix: np.ndarray, colour: tuple[int, int, int]) -> np.ndarray:
    return np.flatnonzero((pix == np.array(colour, dtype=np.uint8)).all(axis=2).any(axis=0))


def _explorer(plan: Plan) -> Explorer:
    net = Network.load(ASSETS / "network.json")
    img = read_image(ASSETS / "scene-test.png").codes[100:160, 200:300]
    return Explorer(net, image=img, plan=plan, slice_points=16, cube_points=4, bins=16)


@pytest.fixture(scope="module")
def quiet() -> tuple[Explorer, BeautifulSoup]:
    """The demo plan on a crop of the demo belt: no event at all."""
    ex = _explorer(Plan.load(ASSETS / "plan.json", Network.load(ASSETS / "network.json")))
    return ex, BeautifulSoup(report_html(ex.session, widget=ex, summary=ex.summary()), "html.parser")


@pytest.fixture(scope="module")
def noisy() -> tuple[Explorer, BeautifulSoup]:
    """A 12-bit accumulator and a narrow table: overflows and clamps on the same crop."""
    net = Network.load(ASSETS / "network.json")
    plan = Plan.load(ASSETS / "plan.json", net).replace(acc_bits=12, table_bits=6)
    ex = _explorer(plan)
    return ex, BeautifulSoup(report_html(ex.session, widget=ex, summary=ex.summary()), "html.parser")


def test_static_colours_are_the_live_widgets() -> None:
    assert {k: (t, hex_colour(c)) for k, (t, c) in EVENT_STYLES.items()} == BAR_EVENTS
    assert hex_colour(HISTOGRAM_COLOUR) == "#4a6fa5"


def test_static_histogram_marks_match_the_live_histogram(quiet: tuple[Explorer, BeautifulSoup]) -> None:
    ex, _ = quiet
    # the live marks are (accumulator low, accumulator high, table low, table high), widgets/events.py
    live = list(ex.histograms.plots[0].marks.colors)
    assert live == [hex_colour(ACC_RANGE_COLOUR)] * 2 + [hex_colour(TABLE_WINDOW_COLOUR)] * 2


def test_histogram_draws_the_table_window_inside_the_accumulator_range_in_their_colours() -> None:
    edges = np.linspace(-16.0, 16.0, 33)
    counts = np.r_[np.zeros(10), np.arange(1, 13) ** 3, np.zeros(10)]
    marks = {"table window": (-8.0, 8.0), "accumulator range": (-16.0, 16.0)}
    cols = {"table window": TABLE_WINDOW_COLOUR, "accumulator range": ACC_RANGE_COLOUR}
    pix = _decode(histogram_png(edges, counts, marks, "L1 n1", mark_colours=cols, x_label="value"))
    plot = pix[pix.shape[0] // 2 : pix.shape[0] * 3 // 4]  # below the legend, above the axis labels
    teal, red = _columns_with(plot, TABLE_WINDOW_COLOUR), _columns_with(plot, ACC_RANGE_COLOUR)
    assert teal.size and red.size and _columns_with(plot, HISTOGRAM_COLOUR).size
    assert red.min() < teal.min() and teal.max() < red.max()  # the window lies inside the range
    # -8 and 8 are a quarter of the way in from each end of [-16, 16]
    width = red.max() - red.min()
    assert abs((teal.min() - red.min()) / width - 0.25) < 0.02
    assert abs((red.max() - teal.max()) / width - 0.25) < 0.02


def test_coinciding_marks_both_stay_visible() -> None:
    marks = {"table window": (-8.0, 8.0), "accumulator range": (-8.0, 8.0)}
    cols = {"table window": TABLE_WINDOW_COLOUR, "accumulator range": ACC_RANGE_COLOUR}
    pix = _decode(histogram_png(np.linspace(-8, 8, 17), np.ones(16), marks, mark_colours=cols))
    plot = pix[pix.shape[0] // 2 : pix.shape[0] * 3 // 4]
    teal, red = set(_columns_with(plot, TABLE_WINDOW_COLOUR)), set(_columns_with(plot, ACC_RANGE_COLOUR))
    assert teal and teal & red  # interleaved dashes on the same columns


def test_a_mark_outside_the_edges_is_not_drawn() -> None:
    cols = {"accumulator range": ACC_RANGE_COLOUR}
    pix = _decode(histogram_png(np.arange(5.0), [1, 2, 3, 4], {"accumulator range": (-100.0, 100.0)},
                                mark_colours=cols))  # fmt: skip
    plot = pix[pix.shape[0] // 2 : pix.shape[0] * 3 // 4]
    assert _columns_with(plot, ACC_RANGE_COLOUR).size == 0
    with pytest.raises(ValueError, match=r"^a mark must be a finite number or a \(low, high\) pair, not nan$"):
        histogram_png(np.arange(3.0), [1, 2], {"x": float("nan")})


def test_nice_ticks_and_labels_are_round_real_values() -> None:
    # steps of 1, 2 or 5 times a power of ten (Heckbert, "Nice numbers for graph labels", Graphics Gems 1990)
    for lo, hi in [(-16.0, 16.0), (-5.339, 4.718), (0.0, 1.0), (-262144.0, 262144.0), (0.001, 0.0042)]:
        t = nice_ticks(lo, hi, 6)
        step = t[1] - t[0]
        mantissa = step / 10 ** np.floor(np.log10(step))
        assert np.isclose(mantissa, [1, 2, 5]).any()
        assert lo - 1e-12 <= t[0] and t[-1] <= hi + 1e-12 and 3 <= t.size <= 12
        labels = [tick_label(v, step) for v in t]
        assert not any("e" in s for s in labels)  # no scientific notation on an everyday axis
        assert [float(s) for s in labels] == pytest.approx(list(t), abs=step * 1e-6)
    assert tick_label(-0.0, 0.5) == "0"


def test_zero_events_picture_says_so_and_keeps_the_legend(quiet: tuple[Explorer, BeautifulSoup]) -> None:
    ex, soup = quiet
    assert sum(ex.session.result.event_totals()[k] for k in EVENT_STYLES) == 0
    fig = soup.find("figure", class_="events-chart")
    assert "no-events" in fig["class"]
    alt = fig.find("img")["alt"]
    assert alt.startswith(f"events per neuron: {NO_EVENTS_TEXT} (")
    for text, _ in EVENT_STYLES.values():
        assert f"{text} 0" in alt
    assert "none (every count is 0)" in fig.find("figcaption").get_text()
    pix = _img(fig)
    assert pix.shape[0] > 100 and pix.shape[1] > 200 and (pix != 255).any(axis=2).mean() > 0.005
    for _, colour in EVENT_STYLES.values():  # every event kind's swatch is in the legend
        assert _columns_with(pix, colour).size > 0
    # the same chart with one event is a different picture: the text replaces the empty frame
    labels = ["L1 n1", "L2 n1"]
    zero = {t: [0, 0] for t, _ in EVENT_STYLES.values()}
    one = {**zero, "accumulator overflows": [0, 1]}
    cols = [c for _, c in EVENT_STYLES.values()]
    a, b = _decode(bar_chart_png(labels, zero, colours=cols)), _decode(bar_chart_png(labels, one, colours=cols))
    assert not np.array_equal(a, b)
    red_in_plot = _columns_with(b[b.shape[0] // 2 :], EVENT_STYLES["acc_overflow"][1])
    assert red_in_plot.size > 0 and _columns_with(a[a.shape[0] // 2 :], EVENT_STYLES["acc_overflow"][1]).size == 0


def test_event_bars_are_drawn_in_the_event_colours(noisy: tuple[Explorer, BeautifulSoup]) -> None:
    ex, soup = noisy
    tot = ex.session.result.event_totals()
    assert tot["acc_overflow"] > 0 and tot["table_low"] + tot["table_high"] > 0
    fig = soup.find("figure", class_="events-chart")
    assert "no-events" not in fig["class"]
    assert f"accumulator overflows {tot['acc_overflow']}" in fig.find("img")["alt"]
    pix = _img(fig)
    lower = pix[pix.shape[0] // 2 :]  # bars grow up from the axis; the legend is at the top
    for k in ("acc_overflow", "table_low", "table_high"):
        assert (_columns_with(lower, EVENT_STYLES[k][1]).size > 0) == (tot[k] > 0), k


def test_histograms_are_in_real_values(noisy: tuple[Explorer, BeautifulSoup]) -> None:
    ex, soup = noisy
    figs = soup.find_all("figure", class_="histogram")
    neurons = ex.session.result.neurons
    assert len(figs) == len(neurons)
    for fig, nr in zip(figs, neurons):
        alt = fig.find("img")["alt"]
        # value = code / 2^frac (Q notation, semantics.md)
        t0, t1 = (c / 2.0**nr.acc_frac for c in nr.table_edges)
        a0, a1 = (c / 2.0**nr.acc_frac for c in nr.acc_edges)
        assert alt == f"histogram {nr.label}: table window {t0:.6g} .. {t1:.6g}, accumulator range {a0:.6g} .. {a1:.6g}"
        cap = fig.find("figcaption").get_text()
        assert "teal dashes" in cap and ("red dashes" in cap or "off scale" in cap)
        assert not re.search(r"\de[+-]\d", cap)  # no scientific-notation LSBs
    rows = [[td.get_text() for td in tr.find_all("td")] for tr in soup.find("table", class_="events").tbody("tr")]
    for row, nr in zip(rows, neurons):
        assert float(row[-2]) == nr.observed_min / 2.0**nr.acc_frac  # exact: a dyadic value prints exactly
        assert float(row[-1]) == nr.observed_max / 2.0**nr.acc_frac
        assert int(row[-4]) == nr.observed_min


def test_summary_blocks_wrap_and_stay_escaped(quiet: tuple[Explorer, BeautifulSoup]) -> None:
    ex, soup = quiet
    style = soup.find("style").get_text()
    pre_rule = re.search(r"(?s)\bpre \{(.*?)\}", style).group(1)
    assert "white-space: pre-wrap" in pre_rule and "overflow-wrap: anywhere" in pre_rule
    assert soup.find("pre", class_="summary").get_text() == ex.summary()
    assert "hardware cost" in soup.find("section", id="cost").find("pre").get_text()


def test_table_cells_align_numbers_right_and_text_left() -> None:
    html = table_html(["a", "b", "c", "d"], [["L1 <n1>", 12, "-3.5", "99.794 %"], ["wrap", None, "1e-3", "x1"]],
                      cls="t")  # fmt: skip
    cells = BeautifulSoup(html, "html.parser").find_all("td")
    assert [c.get("class") for c in cells] == [["text"], None, None, None, ["text"], None, None, ["text"]]
    assert cells[0].get_text() == "L1 <n1>" and "<n1>" not in html


def test_report_histograms_draw_the_window_teal_and_the_range_red(quiet: tuple[Explorer, BeautifulSoup]) -> None:
    _, soup = quiet
    checked = 0
    for fig in soup.find_all("figure", class_="histogram"):
        cap = fig.find("figcaption").get_text()
        plot = (pix := _img(fig))[pix.shape[0] // 2 : pix.shape[0] * 3 // 4]
        teal, red = _columns_with(plot, TABLE_WINDOW_COLOUR), _columns_with(plot, ACC_RANGE_COLOUR)
        assert teal.size > 0
        if "red dashes)" in cap:  # shown and not equal to the table window
            assert red.min() < teal.min() and teal.max() < red.max()
            checked += 1
    assert checked > 0


def test_legend_values_keep_their_precision() -> None:
    # a legend that rounded -0.03125 .. 0.03125 to "0 .. 0" would draw two lines but read as one value
    marks = {"table window": (-0.03125, 0.03125)}
    narrow = histogram_png(np.linspace(-8, 3, 12), np.ones(11), marks, mark_colours={"table window": (0, 0, 0)})
    same_text = histogram_png(np.linspace(-8, 3, 12), np.ones(11), {"table window": (-0.0, 0.0)},
                              mark_colours={"table window": (0, 0, 0)})  # fmt: skip
    legend = slice(0, 40)  # the legend row lies between the title and the plot
    assert not np.array_equal(_decode(narrow)[legend], _decode(same_text)[legend])
