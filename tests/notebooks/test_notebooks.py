"""The example notebooks as regression tests: stored, executed, strict, and a tampered copy fails.

nbval itself runs every notebook in the suite (``--nbval`` in the README's test
command). A notebook saved without outputs passes nbval silently, so the
checks here fail when a notebook has unexecuted code cells, when it has
nothing to compare, or when it stores what the normaliser should drop.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import nbformat
import pytest

ROOT = Path(__file__).resolve().parents[2]
NOTEBOOKS = ROOT / "notebooks"
EXPECTED = ["01-quick-start", "02-trade-offs", "03-your-own-data", "04-cheapest-plan", "05-hand-off",
            "06-in-silicon", "07-footage", "08-your-own-network"]
MARKERS = ("# NBVAL_IGNORE_OUTPUT", "# NBVAL_SKIP", "# NBVAL_CHECK_OUTPUT", "# NBVAL_RAISES_EXCEPTION")


def _paths() -> list[Path]:
    return sorted(NOTEBOOKS.glob("*.ipynb"))


def _compared(cell: nbformat.NotebookNode) -> bool:
    first = cell.source.lstrip().splitlines()[0] if cell.source.strip() else ""
    return first.strip() not in ("# NBVAL_IGNORE_OUTPUT", "# NBVAL_SKIP")


def test_the_example_notebooks_in_reading_order() -> None:
    assert [p.stem for p in _paths()] == EXPECTED


@pytest.mark.parametrize("path", _paths(), ids=lambda p: p.stem)
def test_every_code_cell_was_executed_in_order(path: Path) -> None:
    nb = nbformat.read(path, as_version=4)
    code = [c for c in nb.cells if c.cell_type == "code" and c.source.strip()]
    assert code, "a notebook without code cells tests nothing"
    unexecuted = [i for i, c in enumerate(code) if c.execution_count is None]
    assert unexecuted == [], f"{path.name}: unexecuted code cells {unexecuted} (run scripts/normalise_notebooks.py)"
    assert [c.execution_count for c in code] == list(range(1, len(code) + 1)), "not run top to bottom in one kernel"


@pytest.mark.parametrize("path", _paths(), ids=lambda p: p.stem)
def test_there_is_deterministic_text_to_compare(path: Path) -> None:
    nb = nbformat.read(path, as_version=4)
    compared = [c for c in nb.cells if c.cell_type == "code" and _compared(c)]
    printed = [c for c in compared if any(o.output_type == "stream" and o.name == "stdout" for o in c.outputs)]
    assert len(printed) >= 3, f"{path.name}: fewer than 3 compared cells print anything"
    for c in nb.cells:
        if c.cell_type != "code":
            continue
        for o in c.outputs:
            assert o.output_type != "error", f"{path.name}: a stored error output"
            assert not (o.output_type == "stream" and o.name == "stderr" and _compared(c)), (
                f"{path.name}: stderr in a compared cell: {o.text[:80]!r}"
            )


@pytest.mark.parametrize("path", _paths(), ids=lambda p: p.stem)
def test_stored_small_and_normalised(path: Path) -> None:
    nb = nbformat.read(path, as_version=4)
    assert "widgets" not in nb.metadata
    assert nb.metadata["kernelspec"]["name"] == "python3"
    text = path.read_text(encoding="utf-8")
    assert "application/vnd.jupyter.widget-view+json" not in text
    assert not re.search(r'"execution"\s*:', text), "timing metadata is stored"
    assert [c["id"] for c in nb.cells] == [f"cell-{i:02d}" for i in range(len(nb.cells))]


@pytest.mark.parametrize("path", _paths(), ids=lambda p: p.stem)
def test_widget_cells_ignore_their_output_and_nothing_uses_the_network(path: Path) -> None:
    nb = nbformat.read(path, as_version=4)
    for c in nb.cells:
        if c.cell_type != "code":
            continue
        assert not re.search(r"https?://|urllib|requests\.|socket\.", c.source), f"{path.name}: network use"
        shows = [o for o in c.outputs if o.output_type == "execute_result"]
        # a displayed widget's text/plain is its repr (model ids and layouts): never compare it
        widget_like = [o for o in shows if re.match(r"^(<Explorer |Figure\(|[A-Z]\w*(Box|Panel|Plot)\()",
                                                    o.data.get("text/plain", ""))]  # fmt: skip
        if widget_like:
            assert c.source.lstrip().startswith("# NBVAL_IGNORE_OUTPUT"), f"{path.name}: {c.source[:60]!r}"
        for line in c.source.splitlines():
            if line.strip().startswith("# NBVAL"):
                assert line.strip() in MARKERS, f"{path.name}: unknown marker {line!r}"


def _pytest_nbval(notebooks: list[Path], cwd: Path) -> subprocess.CompletedProcess[str]:
    ini = cwd / "pytest.ini"
    ini.write_text("[pytest]\n", encoding="utf-8")
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    cmd = [sys.executable, "-m", "pytest", "-c", str(ini), "--rootdir", str(cwd), "-p", "no:cacheprovider", "-q",
           "--nbval", "--nbval-current-env", "--nbval-sanitize-with", str(ROOT / "fxnet_widgets/nbval_sanitize.cfg"),
           "--nbval-cell-timeout=120", *map(str, notebooks)]  # fmt: skip
    return subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True, timeout=600)


def test_a_tampered_printed_value_fails_nbval(tmp_path: Path) -> None:
    """Prove strictness once: copy a notebook, change one printed digit, and nbval must fail on that cell only."""
    (tmp_path / "assets").symlink_to(ROOT / "assets")  # the notebooks read ../assets
    work = tmp_path / "notebooks"
    work.mkdir()
    source = NOTEBOOKS / "02-trade-offs.ipynb"
    nb = nbformat.read(source, as_version=4)
    target = None
    for i, c in enumerate(nb.cells):
        if c.cell_type == "code" and _compared(c):
            for o in c.outputs:
                if o.output_type == "stream" and re.search(r"demo plan \|\s+\d+ \|", o.text):
                    target = (i, o)
    assert target is not None, "the demo plan's row is no longer printed"
    i, out = target
    m = re.search(r"(demo plan \|\s+)(\d+)( \|)", out.text)
    assert m is not None
    out.text = out.text[: m.start(2)] + str(int(m.group(2)) + 1) + out.text[m.end(2) :]
    nbformat.write(nb, work / "tampered.ipynb")
    (work / "clean.ipynb").write_text(source.read_text(encoding="utf-8"), encoding="utf-8")
    run = _pytest_nbval([work / "clean.ipynb", work / "tampered.ipynb"], tmp_path)
    report = run.stdout + run.stderr
    assert run.returncode == 1, report[-3000:]
    code_cells = sum(1 for c in nb.cells if c.cell_type == "code")
    assert re.search(rf"\b1 failed, {2 * code_cells - 1} passed\b", report), report[-3000:]
    assert re.search(rf"FAILED\s+\S*tampered\.ipynb::Cell {sum(1 for c in nb.cells[:i] if c.cell_type == 'code')}\b",
                     report), report[-3000:]  # fmt: skip


def test_normaliser_drops_the_noise() -> None:
    sys.path.insert(0, str(ROOT / "scripts"))
    try:
        import normalise_notebooks as norm
    finally:
        sys.path.remove(str(ROOT / "scripts"))
    nb = nbformat.v4.new_notebook()
    nb.metadata["widgets"] = {"application/vnd.jupyter.widget-state+json": {"state": {}}}
    nb.metadata["kernelspec"] = {"name": "some-env", "display_name": "x", "language": "python"}
    cell = nbformat.v4.new_code_cell("# NBVAL_IGNORE_OUTPUT\nw")
    cell.metadata["execution"] = {"iopub.execute_input": "2026-01-01T00:00:00Z"}
    cell.outputs = [nbformat.v4.new_output(
        "execute_result", data={"text/plain": "IntSlider(value=4)",
                                "application/vnd.jupyter.widget-view+json": {"model_id": "a" * 32}},
        execution_count=1,
    )]  # fmt: skip
    nb.cells = [nbformat.v4.new_markdown_cell("# t"), cell]
    out = norm.normalise(nb)
    nbformat.validate(out)
    assert "widgets" not in out.metadata
    assert out.metadata["kernelspec"] == norm.KERNELSPEC
    assert [c["id"] for c in out.cells] == ["cell-00", "cell-01"]
    assert "execution" not in out.cells[1].metadata
    assert dict(out.cells[1].outputs[0].data) == {"text/plain": "IntSlider(value=4)"}
    json.dumps(out)  # still plain JSON
