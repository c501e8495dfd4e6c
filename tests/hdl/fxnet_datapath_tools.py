"""Run a generated datapath directory in Icarus Verilog, GHDL and Verilator (lint).

``run_iverilog(dir)`` / ``run_ghdl(dir)`` compile the datapath with its bench
(``fxnet datapath ... --testbench``) and run it with ``dir`` as the working
directory (the tables are opened by bare file name); ``lint(dir)`` runs
``verilator --lint-only -Wall`` on the module. Each returns ``(status, output)``.
A missing tool skips the test, or fails it under ``FXNET_REQUIRE_TOOLS=1``.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

from fxtools import missing

RESULT = re.compile(
    r"fxnet datapath (verilog|vhdl) bench: (PASS|FAIL) (\d+) clocks, (\d+) outputs compared, (\d+) mismatches"
)
_PACKAGE = {"iverilog": "iverilog", "vvp": "iverilog", "ghdl": "ghdl", "verilator": "verilator"}


def need(name: str) -> str:
    """Path of tool ``name``; skip (or fail under ``FXNET_REQUIRE_TOOLS=1``) when it is missing."""
    path = shutil.which(name)
    if path is None:
        missing(f"{name} is not installed (Debian package {_PACKAGE[name]})")
    assert path is not None
    return path


def run_iverilog(d: Path) -> tuple[int, str]:
    iverilog, vvp = need("iverilog"), need("vvp")
    c = subprocess.run(
        [iverilog, "-g2005", "-Wall", "-o", "tb.vvp", "fxnet_datapath.v", "fxnet_datapath_tb.v"],
        capture_output=True, text=True, cwd=d, timeout=300,
    )  # fmt: skip
    if c.returncode:
        return c.returncode, "iverilog: " + c.stdout + c.stderr
    r = subprocess.run([vvp, "-n", "tb.vvp"], capture_output=True, text=True, cwd=d, timeout=300)
    return r.returncode, c.stdout + c.stderr + r.stdout + r.stderr


def run_ghdl(d: Path) -> tuple[int, str]:
    ghdl = need("ghdl")
    a = subprocess.run(
        [ghdl, "-a", "--std=08", "fxnet_datapath.vhd", "fxnet_datapath_tb.vhd"],
        capture_output=True, text=True, cwd=d, timeout=300,
    )  # fmt: skip
    if a.returncode:
        return a.returncode, "ghdl -a: " + a.stdout + a.stderr
    # registers hold 'U' until the first samples reach them: numeric_std's metavalue notes are noise there
    r = subprocess.run(
        [ghdl, "--elab-run", "--std=08", "fxnet_datapath_tb", "--ieee-asserts=disable"],
        capture_output=True, text=True, cwd=d, timeout=300,
    )  # fmt: skip
    return r.returncode, a.stdout + a.stderr + r.stdout + r.stderr


def lint(d: Path) -> tuple[int, str]:
    verilator = need("verilator")
    r = subprocess.run(
        [verilator, "--lint-only", "-Wall", "fxnet_datapath.v"], capture_output=True, text=True, cwd=d, timeout=300
    )
    return r.returncode, r.stdout + r.stderr


def parse(output: str) -> dict[str, int | str] | None:
    """The bench's result line as a dict, or None."""
    m = RESULT.search(output)
    if not m:
        return None
    keys = ("language", "verdict", "clocks", "compared", "mismatches")
    return {k: (v if i < 2 else int(v)) for i, (k, v) in enumerate(zip(keys, m.groups()))}
