#!/usr/bin/env python
"""Re-execute the example notebooks in place and normalise them, so diffs stay small.

    python scripts/normalise_notebooks.py [NOTEBOOK.ipynb ...]   (default: notebooks/*.ipynb)

Each notebook is run top to bottom with nbconvert's ExecutePreprocessor in
its own directory (the kernel ``python3`` of this environment), without
storing widget state and without timing metadata. Then:

* ``metadata.widgets`` is dropped (tens of KB of base64 even for a tiny demo);
* the kernelspec and language info are set to the same stable values everywhere;
* cell ids become ``cell-NN`` and cell metadata loses ``execution`` entries;
* widget view bundles (``application/vnd.jupyter.widget-view+json``, whose
  model ids change every run) are removed from outputs; their ``text/plain``
  stays.

A cell that fails stops the script with the notebook's name (exit code 1) and
leaves the notebook file untouched. Files are replaced atomically.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import nbformat
from nbconvert.preprocessors import ExecutePreprocessor

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from fxnet_widgets.core.fileio import atomic_write_text  # noqa: E402

KERNELSPEC = {"display_name": "Python 3 (ipykernel)", "language": "python", "name": "python3"}
LANGUAGE_INFO = {"name": "python", "pygments_lexer": "ipython3", "file_extension": ".py",
                 "mimetype": "text/x-python", "nbconvert_exporter": "python"}  # fmt: skip
WIDGET_VIEW = "application/vnd.jupyter.widget-view+json"


def normalise(nb: nbformat.NotebookNode) -> nbformat.NotebookNode:
    """The notebook with the run-to-run noise removed (see the module text)."""
    nb.metadata.pop("widgets", None)
    nb.metadata["kernelspec"] = dict(KERNELSPEC)
    nb.metadata["language_info"] = dict(LANGUAGE_INFO)
    nb.nbformat, nb.nbformat_minor = 4, 5
    for i, cell in enumerate(nb.cells):
        cell["id"] = f"cell-{i:02d}"
        cell.metadata.pop("execution", None)
        cell.metadata.pop("collapsed", None)
        if cell.cell_type != "code":
            continue
        for out in cell.outputs:
            data = out.get("data")
            if data and WIDGET_VIEW in data:
                data.pop(WIDGET_VIEW)
            out.get("metadata", {}).pop(WIDGET_VIEW, None)
    return nb


def run(path: Path, timeout: int) -> float:
    """Execute and normalise one notebook in place; returns the seconds it took."""
    nb = nbformat.read(path, as_version=4)
    ep = ExecutePreprocessor(timeout=timeout, kernel_name="python3", store_widget_state=False, record_timing=False)
    start = time.perf_counter()
    ep.preprocess(nb, {"metadata": {"path": str(path.parent)}})
    seconds = time.perf_counter() - start
    nb = normalise(nb)
    nbformat.validate(nb)
    atomic_write_text(path, nbformat.writes(nb) + "\n")
    return seconds


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("notebooks", nargs="*", type=Path, help="notebooks (default: notebooks/*.ipynb)")
    parser.add_argument("--timeout", type=int, default=300, help="seconds per cell (300)")
    args = parser.parse_args(argv)
    paths = args.notebooks or sorted((ROOT / "notebooks").glob("*.ipynb"))
    for p in paths:
        try:
            seconds = run(p, args.timeout)
        except Exception as exc:  # a failing cell: name the notebook, keep the file
            print(f"{p}: {type(exc).__name__}: {str(exc).strip().splitlines()[-1] if str(exc).strip() else ''}",
                  file=sys.stderr)  # fmt: skip
            return 1
        print(f"{p.name}: executed in {seconds:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
