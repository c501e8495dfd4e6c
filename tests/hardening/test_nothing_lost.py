"""Nothing lost: every file the product writes goes to a temporary file and is renamed.

* A writer that fails (an exception mid-way, a failed rename) leaves the old
  file byte for byte and no temporary file.
* A writer killed with SIGKILL mid-way (a child process held inside ``fsync``,
  after its data is written and before the rename) leaves the old file intact;
  its temporary file carries the dead writer's process id and the next write of
  the same target removes it.
* Each product writer (network, plan, PNG, emulate's npz, array import, export,
  report) ends with a rename of a hidden temporary onto its target.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.cli import main
from fxnet_widgets.core import fileio
from fxnet_widgets.core.images import save_png

ROOT = Path(__file__).resolve().parents[2]

NET = fw.Network.from_layers(
    [([[0.5, -0.25, 0.125], [1.0, 0.0, -1.0], [-0.75, 0.5, 0.25]], [0.1, -0.2, 0.3], "sigmoid"),
     ([[1.5, -2.0, 0.5]], [0.25], "sigmoid")], classes=["other", "ripe"],
)  # fmt: skip
PLAN = fw.Plan.uniform(NET, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=10, table_frac=6, out_bits=8)
NEW_PLAN = PLAN.replace(acc_bits=17)


def temporaries(directory: Path) -> list[str]:
    names = (p.name for p in directory.iterdir())
    return sorted(n for n in names if n.startswith(".") and n.endswith((".tmp", ".partial")))


# -- failures inside the process ------------------------------------------------------------
def test_exception_mid_write_keeps_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "plan.json"
    PLAN.save(target)
    old = target.read_bytes()

    def half_then_fail(fh):
        fh.write(old[: len(old) // 2])
        raise RuntimeError("power cut")

    with pytest.raises(RuntimeError, match=r"^power cut$"):
        fileio.atomic_writer(target, half_then_fail)
    assert target.read_bytes() == old and temporaries(tmp_path) == []


def test_failed_rename_keeps_old_file_and_no_temporary(tmp_path, monkeypatch):
    target = tmp_path / "net.json"
    NET.save(target)
    old = target.read_bytes()

    def no_rename(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(fileio.os, "replace", no_rename)
    with pytest.raises(OSError, match=r"No space left on device"):
        NET.replace_layers([(L.weights * 2, L.bias, L.activation) for L in NET.layers]).save(target)
    monkeypatch.undo()
    assert target.read_bytes() == old and temporaries(tmp_path) == []


def test_failed_emulate_output_keeps_old_npz(tmp_path, monkeypatch):
    NET.save(tmp_path / "net.json")
    PLAN.save(tmp_path / "plan.json")
    np.save(tmp_path / "codes.npy", np.arange(30, dtype=np.uint8).reshape(10, 3))
    out = tmp_path / "out.npz"
    out.write_bytes(b"old result")

    def no_fsync(fd):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(fileio.os, "fsync", no_fsync)
    code = main(["emulate", str(tmp_path / "net.json"), str(tmp_path / "plan.json"), str(tmp_path / "codes.npy"),
                 "-o", str(out)])  # fmt: skip
    assert code == 2
    assert out.read_bytes() == b"old result" and temporaries(tmp_path) == []


# -- SIGKILL mid-way ------------------------------------------------------------------------
PRELUDE = """
import os, sys, time
def _held(fd):  # the data is in the temporary file; the rename has not happened
    sys.stdout.write("mid-way\\n"); sys.stdout.flush(); time.sleep(120)
os.fsync = _held
import fxnet_widgets as fw
"""


def kill_mid_write(code: str, cwd: Path) -> None:
    """Run ``code`` in a child held inside its first fsync, then SIGKILL it there."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    child = subprocess.Popen([sys.executable, "-c", PRELUDE + textwrap.dedent(code)], cwd=cwd, env=env,
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)  # fmt: skip
    try:
        line = child.stdout.readline()
        assert line == "mid-way\n", f"the writer did not reach its write: {child.stderr.read()}"
        child.send_signal(signal.SIGKILL)
        assert child.wait(timeout=30) == -signal.SIGKILL
    finally:
        if child.poll() is None:
            child.kill()
        child.communicate()


def test_killed_plan_writer_keeps_old_plan_then_cleans_up(tmp_path):
    target = tmp_path / "plan.json"
    PLAN.save(target)
    old = target.read_bytes()
    kill_mid_write(f"fw.Plan.from_dict({json.dumps(NEW_PLAN.to_dict())}).save('plan.json')", tmp_path)
    assert target.read_bytes() == old and fw.Plan.load(target) == PLAN
    left = temporaries(tmp_path)
    assert len(left) == 1 and left[0].startswith(".plan.json."), left  # a killed process cannot tidy up
    NEW_PLAN.save(target)  # the next write of the same file removes the dead writer's temporary
    assert fw.Plan.load(target) == NEW_PLAN and temporaries(tmp_path) == []


def test_killed_network_writer_keeps_old_network(tmp_path):
    target = tmp_path / "net.json"
    NET.save(target)
    old = target.read_bytes()
    doc = NET.replace_layers([(L.weights * 3, L.bias, L.activation) for L in NET.layers]).to_dict()
    kill_mid_write(f"fw.Network.from_dict({json.dumps(doc)}).save('net.json')", tmp_path)
    assert target.read_bytes() == old and fw.Network.load(target) == NET
    NET.save(target)
    assert temporaries(tmp_path) == []


def test_killed_emulate_keeps_old_npz(tmp_path):
    NET.save(tmp_path / "net.json")
    PLAN.save(tmp_path / "plan.json")
    save_png(tmp_path / "img.png", np.random.default_rng(2).integers(0, 256, (40, 50, 3), dtype=np.uint8))
    out = tmp_path / "out.npz"
    assert main(["emulate", *(str(tmp_path / n) for n in ("net.json", "plan.json", "img.png")), "-o", str(out)]) == 0
    old = out.read_bytes()
    kill_mid_write("from fxnet_widgets.cli import main; main(['emulate', 'net.json', 'plan.json', 'img.png', "
                   "'-o', 'out.npz'])", tmp_path)  # fmt: skip
    assert out.read_bytes() == old
    with np.load(out, allow_pickle=False) as z:
        assert z["decisions"].shape == (2000,)


def test_killed_export_keeps_old_directory(tmp_path):
    from fxnet_widgets.core.export import export

    target = tmp_path / "hdl"
    export(NET, PLAN, target)
    before = {p.relative_to(target): p.read_bytes() for p in target.rglob("*") if p.is_file()}
    NEW_PLAN.save(tmp_path / "new-plan.json")
    NET.save(tmp_path / "net.json")
    kill_mid_write("from fxnet_widgets.core.export import export; "
                   "export(fw.Network.load('net.json'), fw.Plan.load('new-plan.json'), 'hdl', force=True)",
                   tmp_path)  # fmt: skip
    after = {p.relative_to(target): p.read_bytes() for p in target.rglob("*") if p.is_file()}
    assert after == before
    assert len(temporaries(tmp_path)) == 1  # the killed writer's .hdl.<pid>.*.partial
    export(NET, NEW_PLAN, target, force=True)  # the next export of the same directory removes it
    assert temporaries(tmp_path) == []


def test_killed_report_keeps_old_report(tmp_path):
    pytest.importorskip("fxnet_widgets.report")
    NET.save(tmp_path / "net.json")
    PLAN.save(tmp_path / "plan.json")
    save_png(tmp_path / "img.png", np.random.default_rng(3).integers(0, 256, (8, 9, 3), dtype=np.uint8))
    out = tmp_path / "report.html"
    out.write_text("<p>the old report</p>")
    kill_mid_write("from fxnet_widgets.cli import main; main(['report', 'net.json', 'plan.json', 'img.png', "
                   "'-o', 'report.html'])", tmp_path)  # fmt: skip
    assert out.read_text() == "<p>the old report</p>"


# -- every writer renames a temporary onto its target --------------------------------------
def writers(tmp_path: Path):
    NET.save(tmp_path / "net.json")
    PLAN.save(tmp_path / "plan.json")
    img = np.random.default_rng(4).integers(0, 256, (6, 7, 3), dtype=np.uint8)
    save_png(tmp_path / "img.png", img)
    yield "network", lambda: NET.save(tmp_path / "n2.json"), [tmp_path / "n2.json"]
    yield "plan", lambda: PLAN.save(tmp_path / "p2.json"), [tmp_path / "p2.json"]
    yield "png", lambda: save_png(tmp_path / "i2.png", img), [tmp_path / "i2.png"]
    yield "array import", lambda: fw.save_npz(tmp_path / "n.npz", NET), [tmp_path / "n.npz"]
    args = [str(tmp_path / n) for n in ("net.json", "plan.json", "img.png")]
    yield "emulate", lambda: main(["emulate", *args, "-o", str(tmp_path / "o.npz")]), [tmp_path / "o.npz"]
    yield "export", lambda: main(["export", *args[:2], "-o", str(tmp_path / "hdl")]), [tmp_path / "hdl"]
    yield "report", lambda: main(["report", *args, "-o", str(tmp_path / "r.html")]), [tmp_path / "r.html"]


@pytest.mark.parametrize("which", ["network", "plan", "png", "array import", "emulate", "export", "report"])
def test_every_writer_renames_a_temporary_onto_its_target(tmp_path, monkeypatch, which):
    name, write, targets = next(w for w in writers(tmp_path) if w[0] == which)
    renames = []
    real = os.replace

    def spy(src, dst, *a, **k):
        renames.append((Path(src), Path(dst)))
        return real(src, dst, *a, **k)

    monkeypatch.setattr(os, "replace", spy)
    result = write()
    assert not isinstance(result, int) or result == 0, f"{name} failed"
    monkeypatch.undo()
    for target in targets:
        assert target.exists(), name
        hits = [(s, d) for s, d in renames if d == target]
        assert hits, f"{name}: {target.name} was not renamed into place"
        src = hits[-1][0]
        assert src.parent == target.parent and src.name.startswith("."), src
    assert temporaries(tmp_path) == []


def test_only_temporaries_of_dead_writers_are_removed(tmp_path):
    target = tmp_path / "plan.json"
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
        dead_pid = int(dead.stdout)
        live = tmp_path / f".plan.json.{sleeper.pid}.abc.tmp"  # another writer, still running
        stale = tmp_path / f".plan.json.{dead_pid}.def.tmp"  # a writer that was killed
        other = tmp_path / f".net.json.{dead_pid}.ghi.tmp"  # another target's: not this write's business
        for p in (live, stale, other):
            p.write_text("partial")
        PLAN.save(target)
        assert live.exists() and other.exists() and not stale.exists()
        assert fw.Plan.load(target) == PLAN
    finally:
        sleeper.kill()
        sleeper.wait()
