"""``fxnet lab``: the JupyterLab command it builds and its one-line errors."""

import subprocess
import sys

from fxnet_widgets.cli.lab import DEFAULT_NOTEBOOK, lab_command


def run(*args, cwd=None):
    p = subprocess.run([sys.executable, "-m", "fxnet_widgets.cli", *map(str, args)], capture_output=True,
                       text=True, cwd=cwd)  # fmt: skip
    return p.returncode, p.stdout, p.stderr


def test_root_gets_allow_root_and_others_do_not():
    # JupyterLab's server refuses to start as root unless --allow-root is given (Jupyter Server's
    # ServerApp.allow_root option, from its documentation)
    assert "--allow-root" in lab_command("a.ipynb", as_root=True)
    assert "--allow-root" not in lab_command("a.ipynb", as_root=False)
    argv = lab_command("a.ipynb", as_root=False, extra=["--", "--ServerApp.ip=127.0.0.1"])
    assert argv[-1] == "--ServerApp.ip=127.0.0.1"


def test_dry_run_prints_the_command_for_the_quick_start():
    code, out, err = run("lab", "--dry-run", "--no-browser")
    assert code == 0, err
    words = out.split()
    assert words[1:4] == ["-m", "jupyter", "lab"] and words[5] == DEFAULT_NOTEBOOK
    assert words[4].startswith("--ServerApp.root_dir=")


def test_missing_notebook_and_bad_port_are_one_line(tmp_path):
    code, out, err = run("lab", tmp_path / "nope.ipynb")
    assert (code, err) == (2, f"fxnet lab: {tmp_path / 'nope.ipynb'}: no such notebook\n")
    code, out, err = run("lab", tmp_path / "x.ipynb", cwd=tmp_path)
    assert code == 2 and err.count("\n") == 1
    code, out, err = run("lab", "--port", "0", "--dry-run")
    assert (code, err) == (2, "fxnet lab: --port must be between 1 and 65535, not 0\n")
