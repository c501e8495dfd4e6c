"""The nbval sanitize file shipped with the package (``python -m fxnet_widgets.testing``)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from nbval.plugin import get_sanitize_patterns

from fxnet_widgets.testing import SANITIZE_FILE, sanitize, sanitize_file, sanitize_rules


def test_the_module_prints_the_path_of_an_existing_file() -> None:
    out = subprocess.run([sys.executable, "-m", "fxnet_widgets.testing"], capture_output=True, text=True, check=True)
    assert out.stdout == f"{SANITIZE_FILE}\n"
    assert Path(out.stdout.strip()).is_file()
    assert sanitize_file() == SANITIZE_FILE


def test_rules_read_as_nbval_reads_them() -> None:
    # nbval's own parser of --nbval-sanitize-with files (nbval.plugin.get_sanitize_patterns)
    assert sanitize_rules() == get_sanitize_patterns(SANITIZE_FILE.read_text(encoding="utf-8"))
    assert len(sanitize_rules()) >= 3


@pytest.mark.parametrize(
    ("text", "want"),
    [
        ("<Session at 0x7f3a2b1c4d50>", "<Session at 0xADDRESS>"),
        ('File "/tmp/ipykernel_4242/1234567.py", line 3', 'File "IPYKERNEL_CELL", line 3'),
        ("model 785f206713224706b1eec0cfdb4d880d shown", "model MODEL_ID shown"),
        ("wrote /tmp/tmpab12_xyz/report.html", "wrote TMPDIR/report.html"),
    ],
)
def test_noise_is_replaced(text: str, want: str) -> None:
    assert sanitize(text) == want


def test_values_that_matter_survive() -> None:
    sha = "9d9e52664742a6d8b70f5199e55dbe1a43ba865157477f7fd9b2462026c80972"  # a SHA-256 is 64 hex digits
    text = f"image: 3 of 230400 pixels differ from float; overlay {sha}; acc_overflow 0x10 times"
    assert sanitize(text) == text


def test_a_file_without_rules_is_an_error(tmp_path: Path) -> None:
    bad = tmp_path / "empty.cfg"
    bad.write_text("[nothing]\n", encoding="utf-8")
    want = r"^.*empty\.cfg: a sanitize file must hold regex:/replace: line pairs, not none$"
    with pytest.raises(ValueError, match=want):
        sanitize_rules(bad)
