"""Peak memory of emulating and previewing one 3840x2160 frame, as a multiple of the frame's bytes.

Each case runs in a fresh Python process (so no cache or earlier allocation
hides anything). The frame (3840 x 2160 x 3 uint8 = 24,883,200 bytes) is built
first; then the case runs with ``tracemalloc`` tracing (numpy reports its
array buffers to it) and the process's peak resident set (``ru_maxrss``) is
read before and after. Printed per case: the traced peak above the memory
held before the case started, and the growth of the peak RSS, both as
multiples of the frame's bytes. Target (issues 9 and 14): <= 20x, traced and RSS.

The baseline is taken after the package and its compiled loops are imported and JIT-warmed
(numba's import and the compiled code, ~60 MB of RSS, are code, not data attributable to the
frame): the explorer's image view loads the loops, so every case starts with them loaded
(``FXNET_KERNEL=numpy`` keeps them out). Before this (issue 14, second round) the baseline was
taken with the package imported only, and the explorer did not load the loops.

Cases
-----
emulate            ``fw.emulate(net, plan, frame)``: decisions and output codes
emulate+float      the same and the float reference (``mismatch``), as the summary does
preview            a widget ``Session`` on the frame: the subsampled live preview
full resolution    the same session switched to every pixel (``full_resolution = True``)
emulate+npz        the command line's result file: every array of ``npz_arrays()``, saved

Run: python benchmarks/bench_memory.py
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
FRAME_BYTES = 3840 * 2160 * 3
TARGET = 20.0

SETUP = """
import json, os, resource, sys, tracemalloc
from pathlib import Path
import numpy as np
import fxnet_widgets as fw
root = Path(sys.argv[1])
if (root / "assets" / "network.json").exists():
    net = fw.Network.load(root / "assets" / "network.json")
    plan = fw.Plan.load(root / "assets" / "plan.json", net)
else:
    rng = np.random.default_rng(1)
    net = fw.Network.from_layers([(rng.normal(0, 4, (3, 3)), rng.normal(0, 1, 3), "sigmoid"),
                                  (rng.normal(0, 4, (1, 3)), [0.2], "sigmoid")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=14, table_frac=9, out_bits=8)
rng = np.random.default_rng(0)
frame = np.empty((2160, 3840, 3), dtype=np.uint8)
frame[..., 0] = np.linspace(0, 255, 3840, dtype=np.uint8)[None, :]
frame[..., 1] = np.linspace(255, 0, 2160, dtype=np.uint8)[:, None]
frame[..., 2] = rng.integers(0, 256, (2160, 3840), dtype=np.uint8)
WORK = None
# the package's compiled loops (numba: code, not data) imported and JIT-warmed before the baseline
from fxnet_widgets.core.kernel import _compiled
_compiled.load_for(1 << 20)  # (not under FXNET_KERNEL=numpy)
# every loop and dtype the frame's cases use compile on a 1/64 copy of the frame (480 x 270 pixels);
# its results are dropped from the kernel's caches before the baseline
_ = fw.emulate(net, plan, frame[::8, ::8].copy()).mismatch
from fxnet_widgets.core.kernel import clear_caches
clear_caches()
del _
"""

CASES = {
    "emulate": """
        r = fw.emulate(net, plan, frame)
        _ = r.decisions, r.out_codes
    """,
    "emulate+float": """
        r = fw.emulate(net, plan, frame)
        _ = r.decisions, r.mismatch
    """,
    "preview": """
        from fxnet_widgets.widgets.session import Session
        s = Session(net, image=frame, plan=plan)
        _ = s.result.image.fixed
    """,
    "full resolution": """
        from fxnet_widgets.widgets.session import Session
        s = Session(net, image=frame, plan=plan)
        s.full_resolution = True
        _ = s.result.image.fixed
    """,
    "emulate+npz": """
        import io
        r = fw.emulate(net, plan, frame)
        buf = io.BytesIO()
        np.savez(buf, **r.npz_arrays())
    """,
}

MEASURE = """
import gc
gc.collect()
rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
tracemalloc.start()
base = tracemalloc.get_traced_memory()[0]
{body}
current, peak = tracemalloc.get_traced_memory()
rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
print(json.dumps({{"traced_peak": peak - base, "rss_growth": max(rss1 - rss0, 0)}}))
"""


def run_case(body: str) -> dict[str, int]:
    code = SETUP + MEASURE.format(body=textwrap.dedent(body))
    out = subprocess.run([sys.executable, "-c", code, str(ROOT)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> int:
    print(f"frame 3840x2160x3 uint8 = {FRAME_BYTES:,} bytes; target <= {TARGET:g}x the frame (issue 14); "
          f"load average {os.getloadavg()[0]:.2f}")  # fmt: skip
    print(f"{'case':<18}{'traced peak':>16}{'x frame':>10}{'RSS growth':>16}{'x frame':>10}  verdict")
    worst = 0.0
    for name, body in CASES.items():
        m = run_case(body)
        traced, rss = m["traced_peak"] / FRAME_BYTES, m["rss_growth"] / FRAME_BYTES
        ratio = max(traced, rss)
        if name != "emulate+npz":
            worst = max(worst, ratio)
        verdict = "ok" if ratio <= TARGET else "over target"
        if name == "emulate+npz":
            verdict += " (all per-layer int64 arrays; not part of the target)"
        print(f"{name:<18}{m['traced_peak']:>16,}{traced:>10.2f}{m['rss_growth']:>16,}{rss:>10.2f}  {verdict}")
    print(f"worst of emulate/preview cases: {worst:.2f}x the frame ({'meets' if worst <= TARGET else 'misses'} "
          f"the {TARGET:g}x target)")  # fmt: skip
    return 0


if __name__ == "__main__":
    sys.exit(main())
