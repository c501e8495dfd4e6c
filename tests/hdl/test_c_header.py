"""The C header compiles (C99, -Wall -Werror) and holds the integer network exactly."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from fxnet_random_designs import extreme_designs, random_design

from fxnet_widgets.core.export import export
from fxnet_widgets.core.kernel import build_integer_network

CASES = {"random-1": random_design(1, 10), "random-4": random_design(4, 10)} | extreme_designs()


def _program(intnet) -> str:
    body = []
    for L in intnet.layers:
        n = f"FXNET_L{L.index + 1}"
        body.append(
            f"  for (j = 0; j < {n}_N_OUT; j++) {{ for (i = 0; i < {n}_N_IN; i++) "
            f'printf("%lld\\n", (long long){n}_WEIGHTS[j][i]); printf("%lld\\n", (long long){n}_BIASES[j]); }}'
        )
        body.append(f'  printf("%d %d %d\\n", {n}_SHIFT, {n}_INDEX_MIN, {n}_INDEX_MAX);')
        if L.table is not None:
            body.append(f'  for (i = 0; i < (1 << {n}_TABLE_BITS); i++) printf("%lld\\n", (long long){n}_TABLE[i]);')
    nl = "\n"
    return f"""#include <stdio.h>
#include "fxnet_design.h"
int main(void) {{
  int i, j;
{nl.join(body)}
  return 0;
}}
"""


def _expected(intnet) -> list[str]:
    out = []
    for L in intnet.layers:
        for j in range(L.n_out):
            out += [str(v) for v in L.q_w[j].tolist()] + [str(int(L.q_b[j]))]
        out.append(f"{L.shift} {L.index_min} {L.index_max}")
        if L.table is not None:
            out += [str(v) for v in L.table.tolist()]
    return out


@pytest.mark.parametrize("case", sorted(CASES))
def test_c_header_holds_the_integer_network(tmp_path: Path, case: str) -> None:
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:  # CI requires only the HDL simulators, so a missing compiler is always a skip
        pytest.skip("no C compiler (cc/gcc)")
    net, plan, codes = CASES[case]
    export(net, plan, tmp_path / "hw", vectors=codes)
    intnet = build_integer_network(net, plan)
    src = tmp_path / "main.c"
    src.write_text(_program(intnet))
    # ISO C99 with <stdint.h>; -Wno-unused-const-variable: a header's static tables may go unused
    subprocess.run(
        [cc, "-std=c99", "-Wall", "-Wextra", "-Werror", "-Wno-unused-const-variable", "-I", str(tmp_path / "hw"),
         "-o", str(tmp_path / "main"), str(src)],
        check=True, capture_output=True, text=True,
    )  # fmt: skip
    out = subprocess.run([str(tmp_path / "main")], check=True, capture_output=True, text=True).stdout
    assert out.splitlines() == _expected(intnet)
