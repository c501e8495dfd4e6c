"""The README's examples run as written (a user copies them first)."""

import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text()


def test_python_example_runs(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    code = re.search(r"### The bit-exact kernel in Python\n\n```python\n(.*?)```", README, re.S).group(1)
    exec(compile(code, "README.md", "exec"), {})
    assert capsys.readouterr().out.startswith("emulation of 360x640 image:")


@pytest.mark.parametrize("sub", ["emulate", "cost", "export", "demo", "train"])
def test_command_line_examples_run(tmp_path, sub):
    block = re.search(r"### Command line\n\n```bash\n(.*?)```", README, re.S).group(1)
    line = next(l for l in block.splitlines() if l.split()[1] == sub)
    args = [a for a in shlex.split(line)[1:] if a != "[--json]"]
    # outputs go to a temporary folder; inputs stay the shipped assets
    if "-o" in args:
        i = args.index("-o")
        args[i + 1] = str(tmp_path / Path(args[i + 1]).name)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    p = subprocess.run([sys.executable, "-m", "fxnet_widgets.cli", *args], cwd=ROOT, capture_output=True, text=True,
                       env=env, timeout=300)  # fmt: skip
    assert p.returncode == 0, p.stderr
    assert p.stdout.strip()


def test_test_command_is_the_ci_command():
    ci = (ROOT / ".ci" / "run").read_text()
    assert "<!-- test-command -->" in README and "<!-- test-command -->" in ci
