"""The HTML report: static tables and pictures, escaping, embedded widget state, bundles."""

from __future__ import annotations

import base64
import io
import json
import re
from pathlib import Path

import numpy as np
import pytest
from bs4 import BeautifulSoup
from PIL import Image

from fxnet_widgets.core.analysis.cost import hardware_cost
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import EVENT_NAMES
from fxnet_widgets.core.labels import labels_from_mask
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.render import class_colours
from fxnet_widgets.report import WIDGET_STATE_MIME, WIDGET_VIEW_MIME, report_html, save_report
from fxnet_widgets.report._bundles import (
    HTML_MANAGER_URL,
    REQUIRE_JS_URL,
    html_manager_bundle,
    inline_script,
    named_amd,
    offline_bundles,
)
from fxnet_widgets.report._static import PLAN_FIELDS
from fxnet_widgets.widgets.explorer import Explorer

ASSETS = Path(__file__).resolve().parents[2] / "assets"
EVIL = "<script>alert(1)</script>"


@pytest.fixture(scope="module")
def explorer() -> Explorer:
    """A small explorer on a crop of the demo belt, whose second class name is an HTML injection."""
    demo = Network.load(ASSETS / "network.json")
    net = Network.from_layers(
        [(L.weights, L.bias, L.activation) for L in demo.layers], input_names=("red", "green", "blue"),
        classes=("other", EVIL),
    )  # fmt: skip
    plan = Plan.load(ASSETS / "plan.json", net)
    img = read_image(ASSETS / "scene-test.png").codes[100:190, 200:360]
    mask = read_image(ASSETS / "scene-test-mask.png").codes[100:190, 200:360]
    labels = labels_from_mask(img, mask, classes=net.classes).labels.reshape(img.shape[:2])
    return Explorer(net, image=img, plan=plan, image_labels=labels, slice_points=32, cube_points=8, bins=16)


@pytest.fixture(scope="module")
def page(explorer: Explorer) -> str:
    return report_html(explorer.session, widget=explorer, summary=explorer.summary())


@pytest.fixture(scope="module")
def soup(page: str) -> BeautifulSoup:
    return BeautifulSoup(page, "html.parser")


def _rows(table) -> list[list[str]]:
    return [[td.get_text() for td in tr.find_all("td")] for tr in table.find("tbody").find_all("tr")]


def _png(img) -> np.ndarray:
    src = img["src"]
    assert src.startswith("data:image/png;base64,")
    return np.asarray(Image.open(io.BytesIO(base64.b64decode(src.split(",", 1)[1]))).convert("RGB"))


def test_plan_table_holds_every_field_of_every_layer(explorer: Explorer, soup: BeautifulSoup) -> None:
    table = soup.find("table", class_="plan")
    headers = [th.get_text() for th in table.find_all("th")]
    assert headers == ["layer", "activation", "shape", *PLAN_FIELDS]
    rows = _rows(table)
    assert len(rows) == len(explorer.plan.layers)
    for i, (row, lp) in enumerate(zip(rows, explorer.plan.layers)):
        assert row[0] == str(i + 1)
        cells = dict(zip(PLAN_FIELDS, row[3:]))
        assert cells.pop("out_frac") == "default (8)"  # sigmoid default Fo = Bo (semantics.md step 7)
        assert cells == {f: str(getattr(lp, f)) for f in PLAN_FIELDS if f != "out_frac"}


def test_cost_table_equals_hardware_cost(explorer: Explorer, soup: BeautifulSoup) -> None:
    totals = dict(_rows(soup.find("table", class_="cost-totals")))
    want = hardware_cost(explorer.session.network, explorer.plan).totals()
    assert totals == {k: str(v) for k, v in want.items()}
    assert len(_rows(soup.find("table", class_="cost"))) == len(explorer.plan.layers) + 1  # layers + total


def test_events_table_equals_the_session_counts(explorer: Explorer, soup: BeautifulSoup) -> None:
    table = soup.find("table", class_="events")
    rows = _rows(table)
    neurons = explorer.session.result.neurons
    assert [r[0] for r in rows] == [nr.label for nr in neurons]
    for r, nr in zip(rows, neurons):
        assert r[1 : 1 + len(EVENT_NAMES)] == [str(nr.events[k]) for k in EVENT_NAMES]
        assert r[1 + len(EVENT_NAMES)] == str(nr.safe_acc_bits)


def test_metrics_and_confusion_tables(explorer: Explorer, soup: BeautifulSoup) -> None:
    image = explorer.session.result.image
    (row,) = _rows(soup.find("table", class_="metrics"))
    assert row[1] == str(image.fixed.size)
    assert row[2] == str(image.mismatch)
    confusion = _rows(soup.find("table", class_="confusion"))
    counts = np.array([[int(v) for v in r[1:]] for r in confusion])
    assert counts.sum() == image.fixed.size
    # rows are labels, columns fixed-point decisions (the definition of a confusion matrix, common practice)
    assert counts[:, 1].sum() == int(np.count_nonzero(image.fixed == 1))
    assert counts[1, :].sum() == int(np.count_nonzero(image.labels == 1))


def test_pictures_decode_to_what_the_session_computed(explorer: Explorer, soup: BeautifulSoup) -> None:
    r = explorer.session.result
    previews = soup.find_all("figure", class_="preview")
    assert [f.find("figcaption").get_text().split(" (")[0] for f in previews][:3] == [
        "input", "float decisions", "fixed-point decisions"
    ]  # fmt: skip
    assert np.array_equal(_png(previews[0].find("img")), r.image.codes)
    fixed = _png(previews[2].find("img"))
    assert np.array_equal(fixed, class_colours(2)[r.image.fixed])
    slices = soup.find_all("figure", class_="slice")
    assert len(slices) == 3
    for fig, sl in zip(slices, r.slices):
        pix = _png(fig.find("img"))
        assert pix.shape[0] % sl.y.size == 0 and pix.shape[0] == pix.shape[1]
        f = pix.shape[0] // sl.y.size
        # top-left pixel of the picture is the largest y, smallest x of the slice
        agree_colours = class_colours(2)
        if sl.fixed[-1, 0] == sl.float_[-1, 0]:
            assert tuple(pix[0, 0]) == tuple(agree_colours[sl.fixed[-1, 0]])
        assert pix[:: f, :: f].shape[:2] == (sl.y.size, sl.x.size)
    assert soup.find("figure", class_="cube") is not None
    hist = soup.find_all("figure", class_="histogram")
    assert len(hist) == len(r.neurons)
    assert soup.find("figure", class_="events-chart") is not None


def test_user_text_is_escaped(page: str, soup: BeautifulSoup) -> None:
    assert EVIL not in page
    assert html_escaped(EVIL) in page
    # the class name reads back as text from the confusion table, never as an element
    header = [th.get_text() for th in soup.find("table", class_="confusion").find_all("th")]
    assert header[-1] == EVIL
    for script in soup.find_all("script"):
        assert "alert(1)" not in script.get_text() or script.get("type") in (WIDGET_STATE_MIME, WIDGET_VIEW_MIME)


def html_escaped(text: str) -> str:
    import html

    return html.escape(text)


def test_embedded_state_round_trips_as_json(explorer: Explorer, soup: BeautifulSoup) -> None:
    (state_el,) = soup.find_all("script", type=WIDGET_STATE_MIME)
    state = json.loads(state_el.get_text())
    # the embedding format of ipywidgets 8 (ipywidgets docs, "Embedding Jupyter Widgets in Other Contexts")
    assert (state["version_major"], state["version_minor"]) == (2, 0)
    models = state["state"]
    assert explorer.model_id in models
    views = [json.loads(s.get_text()) for s in soup.find_all("script", type=WIDGET_VIEW_MIME)]
    assert [v["model_id"] for v in views] == [explorer.model_id]
    # every widget reference in the embedded state resolves inside it
    refs = set(re.findall(r"IPY_MODEL_([0-9a-f]{32})", state_el.get_text()))
    assert refs and refs <= set(models)
    # no browser-side links: a page-side copy would be sent back to a kernel as if a person made it (issue 19)
    assert [m for m in models.values() if m["model_name"] in ("LinkModel", "DirectionalLinkModel")] == []
    # the class name is inside the state (a widget shows it), escaped against the HTML parser only
    assert "alert(1)" in state_el.get_text() and "</script" not in state_el.get_text()


def test_page_says_what_works_without_a_kernel(soup: BeautifulSoup) -> None:
    note = soup.find(id="kernel-note")
    items = [li.get_text() for li in note.find("ul", class_="linked").find_all("li")]
    assert items == ["(none)"]
    assert "needs a kernel" in note.get_text()


def test_a_report_of_a_session_alone_has_no_live_widgets(explorer: Explorer) -> None:
    page = BeautifulSoup(report_html(explorer.session), "html.parser")
    assert page.find_all("script", type=WIDGET_VIEW_MIME) == []
    assert page.find(id="summary").get_text().count("plan:") == 1


def test_default_page_loads_scripts_from_cdns_and_inlines_bqplot(soup: BeautifulSoup) -> None:
    srcs = [s.get("src") for s in soup.find_all("script") if s.get("src")]
    assert srcs == [REQUIRE_JS_URL, HTML_MANAGER_URL]
    inline = [s.get_text() for s in soup.find_all("script") if not s.get("src") and not s.get("type")]
    assert len(inline) == 1 and 'define("bqplot",' in inline[0]


def test_reads_without_javascript(soup: BeautifulSoup) -> None:
    for s in soup.find_all("script"):
        s.decompose()
    headings = [h.get_text() for h in soup.find_all("h2")]
    assert headings == ["Summary", "Plan", "Hardware cost", "Metrics", "Overflow and clamps", "Charts", "Image",
                        "Decision boundary", "Live widgets"]  # fmt: skip
    assert "safe accumulator 18 b" in soup.find("ul", class_="formats").get_text()


@pytest.fixture()
def fake_manager(tmp_path: Path) -> Path:
    """A stand-in for the html-manager package: named modules, a webpack font reference, a ``</script``."""
    dist = tmp_path / "html-manager" / "dist"
    dist.mkdir(parents=True)
    (dist / "0123456789abcdef0123.woff2").write_bytes(b"wOF2 font bytes")
    (dist / "embed-amd.js").write_text(
        'define("@jupyter-widgets/html-manager",[],function(){var n={p:""};'
        'var f=n.p+"0123456789abcdef0123.woff2", g=n.p+"fedcba9876543210fedc.ttf";'
        'var s="</script>"; return {f:f,g:g,s:s};});',
        encoding="utf-8",
    )
    return tmp_path / "html-manager"


def test_offline_page_inlines_everything(explorer: Explorer, fake_manager: Path, tmp_path: Path) -> None:
    path = save_report(explorer.session, tmp_path / "offline.html", widget=explorer, offline_bundles=fake_manager)
    page = path.read_text(encoding="utf-8")
    soup = BeautifulSoup(page, "html.parser")
    assert [s for s in soup.find_all("script") if s.get("src")] == []
    assert soup.find_all("link") == [] and not re.search(r"""(src|href)=["']https?:""", page)
    bodies = [s.get_text() for s in soup.find_all("script") if not s.get("type")]
    assert len(bodies) == 4  # require.js, bqplot, bqscales, html manager
    assert 'define("bqplot",' in bodies[1] and 'define("bqscales",' in bodies[2]
    manager = bodies[3]
    font = base64.b64encode(b"wOF2 font bytes").decode()
    assert f'"data:font/woff2;base64,{font}"' in manager
    assert '"data:font/ttf;base64,"' in manager
    assert "<\\/script>" in manager  # the bundle's own "</script>" cannot end the element
    assert json.loads(soup.find("script", type=WIDGET_STATE_MIME).get_text())["version_major"] == 2


def test_bundle_directory_forms(fake_manager: Path) -> None:
    dist = fake_manager / "dist" / "embed-amd.js"
    assert html_manager_bundle(fake_manager) == dist
    assert html_manager_bundle(fake_manager / "dist") == dist
    assert html_manager_bundle(fake_manager.parent) == dist
    assert offline_bundles(fake_manager).offline


def test_missing_bundle_is_a_clear_error(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match=(
        r"^offline_bundles must be a directory holding dist/embed-amd\.js of @jupyter-widgets/html-manager "
        r"\(get it with scripts/fetch_widget_bundles\.sh\), not '.*empty'$"
    )):  # fmt: skip
        (tmp_path / "empty").mkdir()
        html_manager_bundle(tmp_path / "empty")


def test_named_amd_and_inline_script() -> None:
    assert named_amd('/*x*/define(["a"],function(a){})', "bq") == '/*x*/define("bq",["a"],function(a){})'
    with pytest.raises(ValueError, match=r"^lib\.js must hold exactly one anonymous AMD module, not 2$"):
        named_amd("define([],1);define([],2)", "bq", "lib.js")
    with pytest.raises(ValueError, match=r"^lib\.js must hold exactly one anonymous AMD module, not 0$"):
        named_amd('define("x",[],1)', "bq", "lib.js")
    html_text = inline_script('var a="</SCRIPT>", b="<!--";')
    body = html_text.split("<script>\n", 1)[1].rsplit("\n</script>", 1)[0]
    assert "</script" not in body.lower() and "<!--" not in body
    assert body == 'var a="<\\/SCRIPT>", b="<\\!--";'


def test_bad_arguments(explorer: Explorer, tmp_path: Path) -> None:
    with pytest.raises(TypeError, match=r"^session must be a Session, not Explorer$"):
        report_html(explorer)  # the report takes the session (and the widget to embed), not an explorer
    with pytest.raises(TypeError, match=r"^widget must be an ipywidgets Widget or None, not str$"):
        report_html(explorer.session, widget="explorer")
    with pytest.raises(TypeError, match=r"^title must be a str, not int$"):
        report_html(explorer.session, title=3)
    with pytest.raises(TypeError, match=r"^offline_bundles must be a directory path, not int$"):
        report_html(explorer.session, offline_bundles=3)
    missing = tmp_path / "no" / "report.html"
    with pytest.raises(ValueError, match=r"^path must be in an existing directory, not '.*report\.html'$"):
        save_report(explorer.session, missing)


def test_title_is_escaped_and_file_written_atomically(explorer: Explorer, tmp_path: Path) -> None:
    target = tmp_path / "r.html"
    target.write_text("old", encoding="utf-8")
    save_report(explorer.session, target, widget=explorer, title='belt 3 <b>"ripe"</b>')
    soup = BeautifulSoup(target.read_text(encoding="utf-8"), "html.parser")
    assert soup.title.get_text() == 'belt 3 <b>"ripe"</b>'
    assert soup.find("h1").get_text() == 'belt 3 <b>"ripe"</b>'
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.html"]  # no temporary file left behind
