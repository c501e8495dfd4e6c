"""The explorer's "hardware" section in Voila: a click on "synthesize", the tools run, the measured table appears.

``hardware_section.ipynb`` shows an explorer with a cold synthesis cache. The page's
"synthesize" button is clicked; while Yosys and nextpnr-ice40 run (in a kernel
thread) the page stays live; then the table of estimated against measured
resources must appear in the page with exactly the counts the kernel holds, the
device's capacities (iCE40UP5K: 5280 LUTs, 30 memory blocks of 4 kbit, 8 DSP
blocks; Lattice FPGA-DS-02008), and a plan change from Python must label it stale.
"""

from __future__ import annotations

import json
import shutil

import pytest
from fxtools import missing

pytestmark = [pytest.mark.browser, pytest.mark.synth]

ROOT = ".fxnet-explorer .fxnet-hardware"
#: JavaScript: the rows of the hardware table, each a list of its cells' texts
ROWS_JS = f"""() => [...document.querySelectorAll('{ROOT} table.fxnet-hw-table tr')].slice(1)
  .map(r => [...r.children].map(c => c.innerText.trim()))"""


def test_voila_synthesize_click_shows_the_measured_table(voila_hardware_server, new_page, explorer_page, kernel_run):
    for name in ("yosys", "nextpnr-ice40"):
        if shutil.which(name) is None:
            missing(f"{name} is not installed (Debian package {name})")
    server = voila_hardware_server
    page, log = new_page(viewport={"width": 1400, "height": 1200})
    page.goto(server.base + "/", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".fxnet-explorer", timeout=120_000)
    ex = explorer_page(page)
    ex.section("hardware")
    assert page.locator(f"{ROOT} .fxnet-hw-empty").inner_text() == "not synthesized yet: press synthesize"
    button = page.locator(f"{ROOT} button", has_text="synthesize")
    button.click()
    # the button is off while the tools run, and on again once they are done
    page.wait_for_selector(f"{ROOT} table.fxnet-hw-table", timeout=300_000)
    page.wait_for_function(f"() => !document.querySelector('{ROOT} button.mod-primary').disabled", timeout=60_000)

    out = kernel_run(server, "import json as _j; _r = explorer.hardware.result; print('HW', _j.dumps("
                     "{'error': explorer.hardware.error, 'use': _r.use() if _r else None, "
                     "'fmax': _r.fmax_mhz if _r else None}))")  # fmt: skip
    got = json.loads(next(ln for ln in out.splitlines() if ln.startswith("HW "))[3:])
    assert got["error"] == "" and got["use"] is not None, f"the kernel's panel: {got}"
    use = got["use"]
    rows = page.evaluate(ROWS_JS)
    assert [r[0] for r in rows] == ["LUTs", "flip-flops", "block RAMs", "DSP blocks"]
    # iCE40UP5K capacities (FPGA-DS-02008, from memory): 5280 LUTs and flip-flops, 30 blocks, 8 DSP blocks
    for row, key, cap in zip(rows, ("luts", "ffs", "brams", "dsps"), (5280, 5280, 30, 8)):
        used = use[key][0]
        assert use[key][1] == cap and row[2] == str(used), f"{row} against the kernel's {use[key]}"
        assert row[3].endswith(f"{100 * used / cap:.1f} % of {cap}"), row
    assert page.locator(f"{ROOT} .fxnet-bar").count() == 4
    text = page.locator(ROOT).inner_text()
    assert f"maximum clock: {got['fmax']:.2f} MHz (nextpnr, seed 1)" in text
    assert "required clock 74.25 MHz (1280x720p60): " in text and "not sign-off" in text
    assert "stale" not in text

    kernel_run(server, "explorer.plan = explorer.plan.replace(layer=0, acc_bits=15)")
    page.wait_for_function(f"() => /stale: these figures are for another plan/.test("
                           f"document.querySelector('{ROOT}').innerText)", timeout=60_000)  # fmt: skip
    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)
