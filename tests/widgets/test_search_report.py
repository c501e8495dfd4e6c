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
