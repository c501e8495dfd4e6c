"""The house style, enforced: ruff over the package and the tests, mypy over the core (config in pyproject.toml)."""

import importlib.util
import subprocess
import sys
from pathlib import Path

from fxtools import missing

ROOT = Path(__file__).resolve().parents[1]


def _tool(name: str) -> None:
    if importlib.util.find_spec(name) is None:
        missing(f"{name} is not installed (pip install -e '.[test]')")


def test_ruff_is_clean():
    _tool("ruff")
    p = subprocess.run([sys.executable, "-m", "ruff", "check", "fxnet_widgets", "tests"], cwd=ROOT,
                       capture_output=True, text=True)  # fmt: skip
    assert p.returncode == 0, p.stdout[-4000:] + p.stderr[-2000:]


def test_mypy_is_clean_on_the_core():
    _tool("mypy")
    p = subprocess.run([sys.executable, "-m", "mypy"], cwd=ROOT, capture_output=True, text=True)
    assert p.returncode == 0, p.stdout[-4000:] + p.stderr[-2000:]
