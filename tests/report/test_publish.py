"""``publish_notebook``, ``fxnet publish`` and the ``fxnet-page`` nbconvert exporter.

References: the widget state and view MIME types and the embedding layout are
those of ipywidgets' embedding documentation ("Embedding Jupyter Widgets in
Other Contexts than the Notebook"); HTML escaping of ``<`` and ``&`` is the HTML
standard's (WHATWG, "Escaping a string"); nbformat's own reader/validator
decides what a valid notebook is.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
pytest.importorskip("nbconvert")
pytest.importorskip("bqplot")

from fxnet_widgets.cli import main  # noqa: E402
from fxnet_widgets.report._bundles import find_share_file  # noqa: E402
from fxnet_widgets.report.publish import PageExporter, publish_notebook  # noqa: E402

STATE = "application/vnd.jupyter.widget-state+json"
VIEW = "application/vnd.jupyter.widget-view+json"


def _notebook(path: Path) -> Path:
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.cells = [
        nbformat.v4.new_markdown_cell("# Sorting line check"),
        nbformat.v4.new_code_cell(
            "import ipywidgets as w\nprint('ripe <fruit> & leaves')\n"
            "w.IntSlider(value=7, max=20, description='ripeness')"
        ),
        nbformat.v4.new_code_cell(
            "import bqplot.pyplot as plt\nfig = plt.figure(title='red share')\n"
            "plt.plot([0, 1, 2], [0.1, 0.4, 0.8])\nfig"
        ),
    ]
    nbformat.write(nb, str(path))
    return path


@pytest.fixture(scope="module")
def published(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, str]:
    d = tmp_path_factory.mktemp("publish")
    src = _notebook(d / "team.ipynb")
    out = publish_notebook(src, d / "team.html", execute=True, timeout=120)
    return src, out.read_text(encoding="utf-8")


def _state(html: str) -> dict:
    m = re.search(rf'<script type="{re.escape(STATE)}">\s*(.*?)\s*</script>', html, re.S)
    assert m, "no widget state script"
    return json.loads(m.group(1))


def test_page_holds_state_bundle_text_versions(published: tuple[Path, str]) -> None:
    _, html = published
    state = _state(html)["state"]
    models = {m["model_name"] for m in state.values()}
    assert {"IntSliderModel", "FigureModel"} <= models
    slider = next(m for m in state.values() if m["model_name"] == "IntSliderModel")
    assert slider["state"]["value"] == 7 and slider["state"]["description"] == "ripeness"
    # every shown view refers to a model in the state
    views = [json.loads(v) for v in re.findall(rf'<script type="{re.escape(VIEW)}">\s*(.*?)\s*</script>', html, re.S)]
    assert len(views) == 2 and all(v["model_id"] in state for v in views)
    # bqplot's bundle from the wheel, inlined under a module name
    assert find_share_file(("nbextensions", "bqplot", "index.js"), "bqplot").is_file()
    assert 'define("bqplot",' in html
    # the user's printed text, escaped (WHATWG escaping: < -> &lt;, & -> &amp;)
    assert "ripe &lt;fruit&gt; &amp; leaves" in html and "ripe <fruit>" not in html
    for pkg in ("ipywidgets", "bqplot", "nbconvert"):
        assert f"{pkg} {metadata.version(pkg)}" in html
    assert "Kernel: <code>python3</code>" in html
    assert re.search(r"execution time: \d+\.\d\d s \(measured while publishing\)", html)
    assert "IntSliderModel (@jupyter-widgets/controls), FigureModel (bqplot)" in html
    # static fallback: each widget's text/plain inside <noscript>
    assert len(re.findall(r'<noscript><div class="fxnet-fallback">\s*<pre>IntSlider\(', html)) == 1


def test_static_forms_show_saved_values(published: tuple[Path, str]) -> None:
    """With JavaScript off: the slider's saved value and the figure drawn as SVG from its saved arrays."""
    _, html = published
    fallbacks = re.findall(r'<noscript><div class="fxnet-fallback">(.*?)</div></noscript>', html, re.S)
    assert len(fallbacks) == 2
    assert "<p>ripeness: 7</p>" in fallbacks[0]
    svg = re.search(r'<svg[^>]*class="fxnet-static-figure".*?</svg>', fallbacks[1], re.S)
    assert svg and "red share" in svg.group(0)
    # the saved line y = [0.1, 0.4, 0.8] over x = [0, 1, 2]: three points, first at the plot's left
    # edge and bottom (lowest y), last at the right edge and top (the SVG's y axis points down)
    points = re.search(r'<polyline[^>]*points="([^"]+)"', svg.group(0))
    assert points
    xy = [tuple(map(float, p.split(","))) for p in points.group(1).split()]
    assert len(xy) == 3 and xy[0][0] < xy[1][0] < xy[2][0] and xy[0][1] > xy[1][1] > xy[2][1]
    assert xy[1][0] - xy[0][0] == pytest.approx(xy[2][0] - xy[1][0])  # x evenly spaced, as saved
    # the middle y (0.4) lies 3/7 of the way up from 0.1 to 0.8
    assert (xy[0][1] - xy[1][1]) / (xy[0][1] - xy[2][1]) == pytest.approx(3 / 7, abs=0.01)


def test_notebook_without_state_says_so(tmp_path: Path) -> None:
    src = _notebook(tmp_path / "plain.ipynb")  # never executed: no widget state
    html = publish_notebook(src, tmp_path / "plain.html").read_text(encoding="utf-8")
    assert "saved without widget state" in html
    assert 'define("bqplot",' not in html and STATE not in html
    assert "execution time: not recorded" in html


def test_no_input_and_cell_timing(tmp_path: Path, published: tuple[Path, str]) -> None:
    src = _notebook(tmp_path / "nb.ipynb")
    nb = nbformat.read(str(src), as_version=4)
    nb.cells[1].metadata["execution"] = {"iopub.execute_input": "2026-01-01T10:00:00.000000Z",
                                         "shell.execute_reply": "2026-01-01T10:00:01.500000Z"}  # fmt: skip
    nbformat.write(nb, str(src))
    html = publish_notebook(src, tmp_path / "nb.html", no_input=True).read_text(encoding="utf-8")
    assert "1.50 s (from the cells' timing metadata)" in html
    assert "w.IntSlider" not in html  # the code is left out


def test_cli_errors_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["publish", str(tmp_path / "missing.ipynb"), "-o", str(tmp_path / "x.html")]) == 2
    bad = tmp_path / "bad.ipynb"
    bad.write_text("{not json", encoding="utf-8")
    assert main(["publish", str(bad), "-o", str(tmp_path / "x.html")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and "missing.ipynb" in err[0] and "bad.ipynb" in err[1] and "valid Jupyter notebook" in err[1]
    assert not (tmp_path / "x.html").exists()
    assert main(["publish", str(_notebook(tmp_path / "ok.ipynb")), "-o", str(tmp_path / "x.html"),
                 "--offline", str(tmp_path / "nope")]) == 2  # fmt: skip
    assert "--offline must be an existing directory" in capsys.readouterr().err


def test_nbconvert_uses_the_exporter(tmp_path: Path) -> None:
    """``jupyter nbconvert --to fxnet-page`` (the entry point pyproject.toml registers) gives the page."""
    eps = [ep.value for ep in metadata.entry_points(group="nbconvert.exporters") if ep.name == "fxnet-page"]
    # the README's install (pip install -e .) registers the entry point (nbconvert's exporter lookup, from memory)
    assert eps == ["fxnet_widgets.report.publish:PageExporter"]
    src = _notebook(tmp_path / "nb.ipynb")
    done = subprocess.run(
        [sys.executable, "-m", "jupyter", "nbconvert", "--to", "fxnet-page",
         str(src), "--output", "page", "--output-dir", str(tmp_path)],
        capture_output=True, text=True, timeout=120,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    html = (tmp_path / "page.html").read_text(encoding="utf-8")
    # the same page as publish_notebook gives (the notebook is not executed, so nothing differs)
    assert publish_notebook(src, tmp_path / "same.html").read_text(encoding="utf-8") == html
    assert "fxnet-page-facts" in html and "saved without widget state" in html
    assert PageExporter().file_extension == ".html"
