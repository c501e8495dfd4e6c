"""The report's hardware section: the explorer's last synthesis result, and "stale" once the plan changed.

The figures are real Yosys / nextpnr-ice40 runs (through the explorer's "hardware"
section); the device capacities are the datasheet figures named in
``core/synth/targets.py``. Without the tools, the tests that need them skip (fail in CI).
"""

from __future__ import annotations

import math
import shutil
import threading

import pytest
from bs4 import BeautifulSoup
from fxtools import missing

from fxnet_widgets.core.analysis.cost import hardware_cost
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.core.synth import CAUTION, ToolError, synthesize
from fxnet_widgets.report import report_html
from fxnet_widgets.widgets.explorer import Explorer
from fxnet_widgets.widgets.hardware import HardwarePanel
from fxnet_widgets.widgets.session import Session

EVIL = "<script>alert(1)</script>"


def _net() -> Network:
    return Network.from_layers(
        [
            ([[9.2, -12.4, -2.9], [8.9, -11.6, -3.2], [-9.4, 12.8, 2.8]], [-0.36, -0.36, 0.4], "sigmoid"),
            ([[6.1, 5.7, -6.3]], [-2.9], "sigmoid"),
        ],
        classes=["other", "ripe"],
    )


def _plan(net: Network, table_bits: int = 10) -> Plan:
    """Four tables of 2**table_bits words x 8 bits (2**10: two iCE40 4 kbit memory blocks each)."""
    return Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, out_bits=8, table_bits=table_bits,
                        table_frac=6).replace(layer=1, weight_frac=5, acc_bits=17)  # fmt: skip


def _section(widget, session) -> BeautifulSoup | None:
    soup = BeautifulSoup(report_html(session, widget=widget), "html.parser")
    return soup.find("section", id="hardware")


def test_no_section_before_any_synthesis():
    net = _net()
    ex = Explorer(net, plan=_plan(net), slice_points=16, cube_points=8)
    assert _section(ex, ex.session) is None
    assert _section(None, ex.session) is None


@pytest.mark.synth
def test_the_last_result_then_stale_after_a_plan_change(tmp_path, monkeypatch):
    for name in ("yosys", "nextpnr-ice40"):
        if shutil.which(name) is None:
            missing(f"{name} is not installed (Debian package {name})")
    monkeypatch.setenv("FXNET_SYNTH_CACHE", str(tmp_path / "cache"))
    net = _net()
    plan = _plan(net)
    ex = Explorer(net, plan=plan, slice_points=16, cube_points=8)
    ex.hardware.button.click()
    assert ex.hardware.wait(300) and ex.hardware.error == ""
    r = synthesize(net, plan, target="ice40-up5k", video="1280x720p60", pipeline="auto")  # from the cache
    assert ex.hardware.result == r
    sec = _section(ex, ex.session)
    assert sec is not None and sec.find(class_="stale") is None
    facts = [li.get_text() for li in sec.find("ul", class_="hardware-facts").find_all("li")]
    # 1280x720p60: 74.25 MHz pixel clock (CTA-861 VIC 4)
    assert facts[:4] == ["target ice40-up5k, device iCE40UP5K-SG48", "clock 74.25 MHz (1280x720p60)",
                         "pipeline auto", f"latency {r.latency} clocks"]  # fmt: skip
    table = sec.find("table", class_="hardware")
    rows = [[td.get_text().strip() for td in tr.find_all("td")] for tr in table("tr")[1:]]
    est = hardware_cost(net, plan, target="ice40-up5k").estimated()
    # iCE40UP5K: 5280 LUTs (and as many flip-flops), 30 sysMEM blocks of 4 kbit, 8 DSP blocks (FPGA-DS-02008)
    assert rows == [
        ["LUTs", str(est["luts"]), str(r.luts), "5280", f"{100 * r.luts / 5280:.1f} %"],
        ["flip-flops", str(est["ffs"]), str(r.ffs), "5280", f"{100 * r.ffs / 5280:.1f} %"],
        ["block RAMs", str(est["brams"]), str(r.brams), "30", f"{100 * r.brams / 30:.1f} %"],
        ["DSP blocks", str(est["dsps"]), str(r.dsps), "8", f"{100 * r.dsps / 8:.1f} %"],
    ]
    assert r.brams == 4 * math.ceil(2**10 * 8 / 4096)  # four tables of 8 kbit in 4 kbit blocks
    assert len(sec.select("table.hardware .fxnet-bar")) == 4
    timing = [li.get_text() for li in sec.find("ul", class_="hardware-timing").find_all("li")]
    assert f"maximum clock: {r.fmax_mhz:.2f} MHz (nextpnr, seed 1)" in timing
    verdict = "met" if r.fmax_mhz >= 74.25 else "NOT met"
    assert any(t.startswith(f"required clock 74.25 MHz (1280x720p60): {verdict} (margin x{r.fmax_mhz / 74.25:.2f}, ")
               for t in timing)  # fmt: skip
    tools = sec.find(class_="tools").get_text()
    assert r.tools["yosys"] in tools and r.tools["nextpnr-ice40"] in tools
    assert CAUTION in sec.find(class_="caution").get_text()

    ex.plan = _plan(net, 9)
    stale = _section(ex, ex.session).find(class_="stale")
    assert stale is not None
    assert stale.get_text().startswith("stale: computed for another plan (L1 W8.4 A16 T10.6 O8, ")
    assert "not the plan of this report (L1 W8.4 A16 T9.6 O8, " in stale.get_text()


def test_a_failure_and_a_run_in_progress_are_said_escaped():
    net = _net()
    session = Session(net, plan=_plan(net))

    def fail(network, plan, **kw):
        raise ToolError(f"yosys must succeed on {EVIL}, but it exited with code 1; its last lines:\n  ERROR: x")

    panel = HardwarePanel(session, run=fail)
    panel.start()
    assert panel.wait(30)
    page = report_html(session, widget=panel)
    sec = BeautifulSoup(page, "html.parser").find("section", id="hardware")
    assert sec.find(class_="error").get_text() == (f"last synthesis: yosys must succeed on {EVIL}, but it exited "
                                                   "with code 1; its last lines:")  # fmt: skip
    assert EVIL not in page.split('<section id="live">')[0]  # escaped in the static part

    release = threading.Event()

    def held(network, plan, *, cancel, progress, **kw):
        release.wait(30)
        raise ToolError("not run")

    running = HardwarePanel(session, run=held)
    running.start()
    try:
        sec = BeautifulSoup(report_html(session, widget=running), "html.parser").find("section", id="hardware")
        assert sec.find(class_="running").get_text().startswith("A synthesis was running when this report was saved")
    finally:
        release.set()
        assert running.wait(30)
