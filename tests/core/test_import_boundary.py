"""The core never imports a widget library (architecture.md, "The house")."""

import subprocess
import sys

FORBIDDEN = ("ipywidgets", "bqplot", "traitlets")


def _loaded_after(statement: str) -> list[str]:
    code = f"import sys; {statement}; print(' '.join(sorted(m for m in sys.modules)))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    return [m for m in out if m.split(".")[0] in FORBIDDEN]


def test_core_imports_no_widget_library():
    assert _loaded_after("import fxnet_widgets.core") == []


def test_package_face_imports_no_widget_library():
    assert _loaded_after("import fxnet_widgets; fxnet_widgets.emulate") == []


def test_cli_imports_no_widget_library():
    assert _loaded_after("import fxnet_widgets.cli; fxnet_widgets.cli.build_parser()") == []


def test_no_pickle_anywhere():
    # no pickle anywhere (semantics.md, "Files"): every np.load passes allow_pickle=False
    import pathlib
    import re

    root = pathlib.Path(__file__).resolve().parents[2] / "fxnet_widgets"
    for path in root.rglob("*.py"):
        text = path.read_text()
        assert "import pickle" not in text and "cPickle" not in text, path
        for m in re.finditer(r"np\.load\(([^)]*)\)", text):
            assert "allow_pickle=False" in m.group(1), f"{path}: {m.group(0)}"
