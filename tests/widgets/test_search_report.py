"""The report's search and comparison sections: the front table, the scatter picture, A against B."""

from __future__ import annotations

import base64
import io
import re

import pytest
from PIL import Image

from fxnet_widgets.report._search import extra_sections
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.search_panel import SearchPanel


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


def test_sections_carry_the_front_and_the_comparison(explorer):
    assert extra_sections(explorer) == ""
    panel = SearchPanel(explorer, {"weight_bits": [4, 6, 8, 10], "table_bits": [6, 9]})
    assert extra_sections(explorer) == ""  # nothing run yet
    panel.run(wait=True)
    html = extra_sections(explorer)
    front = panel.front
    body = html.split('class="search-front"')[1].split("</table>")[0]
    cells = re.findall(r"<tr>(.*?)</tr>", body)[1:]
    assert len(cells) == len(front)
    for row, r in zip(cells, front):
        assert f"<td>{panel.records.index(r)}</td>" in row and f"<td>{r.cost}</td>" in row
    png = base64.b64decode(re.search(r'search-scatter"><img alt="[^"]*" src="data:image/png;base64,([^"]+)"',
                                     html).group(1))  # fmt: skip
    assert Image.open(io.BytesIO(png)).size == (640, 400)
    assert 'id="compare"' not in html
    cmp = explorer.compare(front[0].plan)
    html = extra_sections(explorer)
    body = html.split('class="compare"')[1].split("</table>")[0]
    rows = {r[0]: r[1:] for r in (re.findall(r"<td[^>]*>(.*?)</td>", tr) for tr in re.findall(r"<tr>(.*?)</tr>", body))
            if r}  # fmt: skip
    a, b = (dict((label, (x, y)) for label, x, y in cmp.comparison.rows)["cost total_bits"])
    assert rows["cost total_bits"][:2] == [str(a), str(b)]
    assert html.count('class="compare-slice"') == 3 and 'class="compare-image"' in html


def test_report_carries_the_sweep_and_the_pinned_comparison(explorer):
    """The saved page: the scatter PNG, the front as a table (equal to a bare ``sweep``'s Pareto front), A and B."""
    from bs4 import BeautifulSoup

    from fxnet_widgets.core.analysis import pareto_front, sweep
    from fxnet_widgets.report import report_html

    page = BeautifulSoup(report_html(explorer.session, widget=explorer), "html.parser")
    assert page.find(id="search") is None and page.find(id="compare") is None  # nothing run or pinned yet
    grid = {"weight_bits": [4, 6, 8, 10], "table_bits": [6, 9]}
    panel = SearchPanel(explorer, grid)
    base = explorer.plan
    panel.run(wait=True)
    s = explorer.session
    bare = sweep(s.network, s.samples, grid, base=base, layer=0, labels=s.labels)  # the core's own sweep
    want = [(bare.index(r), r.cost, r.mismatch) for r in pareto_front(bare)]
    cmp = explorer.compare(panel.front[0].plan)
    page = BeautifulSoup(report_html(explorer.session, widget=explorer), "html.parser")
    ids = [sec.get("id") for sec in page.find_all("section")]
    assert ids.index("search") < ids.index("compare") < ids.index("live")  # static parts before the live widgets
    img = page.select_one("#search figure.search-scatter img")
    png = base64.b64decode(img["src"].split(",", 1)[1])
    assert Image.open(io.BytesIO(png)).format == "PNG"
    rows = [[td.get_text() for td in tr.find_all("td")] for tr in page.select("#search table.search-front tr")[1:]]
    assert [(int(r[0]), int(r[2]), int(r[3])) for r in rows] == want
    head = [th.get_text() for th in page.select("#compare table.compare tr")[0].find_all("th")]
    assert head == ["", "A", "B", "change"]
    got = {tr.find_all("td")[0].get_text(): [td.get_text() for td in tr.find_all("td")[1:3]]
           for tr in page.select("#compare table.compare tr")[1:]}  # fmt: skip
    a, b = dict((label, (x, y)) for label, x, y in cmp.comparison.rows)["cost total_bits"]
    assert got["cost total_bits"] == [str(a), str(b)]
