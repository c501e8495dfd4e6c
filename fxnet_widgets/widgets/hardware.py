"""The hardware panel: synthesize the current plan with the open-source tools, in the background.

A "synthesize" button runs :func:`fxnet_widgets.core.synth.synthesize` on the
session's network and current plan in a background thread (the other views stay
live), with a progress bar and a "stop" button. The panel shows estimated
(calibrated) against measured resources with the device's use, and the maximum
clock against the required pixel clock. Figures belong to the plan they were
computed for: when the session's plan changes, they are labelled as stale.
Open-tool figures are estimates for the named device and tool version, not sign-off.
"""

from __future__ import annotations

import html
import threading
from collections.abc import Callable
from typing import Any

import ipywidgets as w

from ..core.analysis.cost import hardware_cost
from ..core.analysis.video import VIDEO_FORMATS
from ..core.fileio import first_line
from ..core.plan import Plan
from ..core.synth import CAUTION, TARGETS, SynthesisCancelled, SynthesisResult, synthesize
from .session import Session
from .status import plan_widths

__all__ = ["HardwarePanel", "CLOCK_MHZ"]

#: the clock chooser's entry for a clock given in MHz rather than by a video format
CLOCK_MHZ = "clock (MHz)"
_NAMES = {"luts": "LUTs", "ffs": "flip-flops", "brams": "block RAMs", "dsps": "DSP blocks"}


class HardwarePanel(w.VBox):
    """Target and clock choosers, "synthesize" / "stop", progress, and the measured figures.

    Parameters
    ----------
    session
        The session whose network and current plan are synthesized.
    target, video, clock_mhz
        Initial target (one of ``TARGETS``), video format (or :data:`CLOCK_MHZ` to use ``clock_mhz``).
    run
        The synthesis function, called as ``run(network, plan, target=..., video=..., clock_mhz=...,
        progress=..., cancel=...)`` (default :func:`~fxnet_widgets.core.synth.synthesize`).

    Attributes
    ----------
    result : SynthesisResult or None
        The last result; ``result_plan`` is the plan it was computed for.
    error : str
        The last failure as one line ("" when none).
    text : str
        The panel's figures as deterministic plain text.
    """

    def __init__(
        self, session: Session, *, target: str = "ice40-up5k", video: str = "1280x720p60", clock_mhz: float = 100.0,
        run: Callable[..., SynthesisResult] | None = None, **kwargs: Any,
    ) -> None:  # fmt: skip
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        self.session = session
        self._run_fn = run or synthesize
        self.target = w.Dropdown(options=list(TARGETS), value=target, description="target")
        self.clock = w.Dropdown(options=[*VIDEO_FORMATS, CLOCK_MHZ], value=video, description="clock")
        self.clock_mhz = w.BoundedFloatText(value=clock_mhz, min=0.001, max=9999.0, step=0.25, description="MHz")
        self.button = w.Button(description="synthesize", button_style="primary", icon="microchip")
        self.stop_button = w.Button(description="stop", disabled=True, icon="stop")
        self.progress = w.FloatProgress(value=0.0, min=0.0, max=1.0, description="")
        self.message = w.Label("")
        self.stale = w.HTML("")
        self.figures = w.HTML("")
        self.caution = w.HTML(f"<small style='color:#555'>{html.escape(CAUTION)}</small>")
        self.result: SynthesisResult | None = None
        self.result_plan: Plan | None = None
        self.error = ""
        self._thread: threading.Thread | None = None
        self._cancel = threading.Event()
        self._lock = threading.Lock()
        self.button.on_click(lambda _b: self.start())
        self.stop_button.on_click(lambda _b: self.stop())
        session.observe(lambda _c: self._show(), names=["plan"])
        controls = w.HBox([self.target, self.clock, self.clock_mhz], layout=w.Layout(flex_flow="row wrap"))
        actions = w.HBox([self.button, self.stop_button, self.progress, self.message])
        super().__init__([controls, actions, self.stale, self.figures, self.caution], **kwargs)
        self.add_class("fxnet-hardware")
        self._show()

    @property
    def running(self) -> bool:
        return self._thread is not None and self._thread.is_alive()

    def _clock_args(self) -> dict[str, Any]:
        if self.clock.value == CLOCK_MHZ:
            return {"video": None, "clock_mhz": float(self.clock_mhz.value)}
        return {"video": self.clock.value, "clock_mhz": None}

    def start(self) -> None:
        """Synthesize the session's current plan in a background thread (ignored while one runs)."""
        with self._lock:
            if self.running:
                return
            plan, network = self.session.plan, self.session.network
            args = {"target": self.target.value, **self._clock_args()}
            self._cancel = threading.Event()
            self.error = ""
            self.button.disabled, self.stop_button.disabled = True, False
            self.progress.value, self.progress.bar_style = 0.0, ""
            self.message.value = "starting"
            self._thread = threading.Thread(target=self._work, args=(network, plan, args, self._cancel), daemon=True)
            self._thread.start()

    def stop(self) -> None:
        """Stop the running synthesis (its tool is killed; nothing is cached)."""
        self._cancel.set()

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for the running synthesis; True when none is running any more."""
        thread = self._thread
        if thread is not None:
            thread.join(timeout)
        return not self.running

    def _progress(self, fraction: float, message: str) -> None:
        self.progress.value = max(0.0, min(1.0, float(fraction)))
        self.message.value = message

    def _work(self, network: Any, plan: Plan, args: dict[str, Any], cancel: threading.Event) -> None:
        try:
            result = self._run_fn(network, plan, progress=self._progress, cancel=cancel, **args)
        except SynthesisCancelled:
            self.error, self.message.value, self.progress.bar_style = "stopped", "stopped", "warning"
        except Exception as exc:  # any failure is shown in the panel, never only in a log
            self.error, self.message.value, self.progress.bar_style = first_line(exc), "failed", "danger"
        else:
            self.result, self.result_plan = result, plan
            self.message.value = "done (from the cache)" if result.cached else "done"
            self.progress.value, self.progress.bar_style = 1.0, "success"
        finally:
            self.button.disabled, self.stop_button.disabled = False, True
            self._show()

    def _estimates(self) -> dict[str, int] | None:
        if self.result is None or self.result_plan is None:
            return None
        try:
            return hardware_cost(self.session.network, self.result_plan, target=self.result.target).estimated()
        except ValueError:
            return None  # no calibration for this target

    @property
    def text(self) -> str:
        """The figures as plain text: stale note, resources (estimated, measured, of the device), clock."""
        lines = []
        if self.error:
            lines.append(f"error: {self.error}")
        r = self.result
        if r is None:
            lines.append("not synthesized yet: press synthesize")
            return "\n".join(lines)
        if self.result_plan != self.session.plan:
            assert self.result_plan is not None
            lines.append(f"stale: these figures are for another plan ({plan_widths(self.result_plan)}), "
                         "not the current one")  # fmt: skip
        lines.append(f"{r.target} ({r.device})")
        est = self._estimates() or {}
        for key, (used, cap) in r.use().items():
            e = f"estimated {est[key]}, " if key in est else ""
            share = f" of {cap} ({100 * used / cap:.1f} %)" if cap else ""
            lines.append(f"  {_NAMES[key]}: {e}measured {used}{share}")
        if not r.fits:
            lines.append(f"  does NOT fit: needs {'; '.join(r.overflows())}")
        if r.fmax_mhz is not None:
            lines.append(f"  maximum clock: {r.fmax_mhz:.2f} MHz (nextpnr, seed {r.seed})")
        if r.clock_mhz is not None:
            wanted = f"{r.clock_mhz:g} MHz" + (f" ({r.video})" if r.video else "")
            if r.meets_clock is None:
                lines.append(f"  required clock {wanted}: not timed")
            else:
                lines.append(f"  required clock {wanted}: {'met' if r.meets_clock else 'NOT met'} "
                             f"(margin x{r.margin:.2f})")  # fmt: skip
        if r.latency is not None:
            lines.append(f"  latency: {r.latency} clocks")
        lines.append("  tools: " + "; ".join(r.tools.values()))
        return "\n".join(lines)

    def _show(self) -> None:
        self.clock_mhz.disabled = self.clock.value != CLOCK_MHZ
        r = self.result
        stale = r is not None and self.result_plan != self.session.plan
        self.stale.value = (
            "<b style='color:#b06000'>stale: these figures are for another plan, not the current one</b>"
            if stale else ""
        )  # fmt: skip
        rows = [f"<div style='color:#b00020'>{html.escape(self.error)}</div>"] if self.error else []
        if r is not None:
            est = self._estimates() or {}
            rows.append("<table style='font-size:12px;border-collapse:collapse'><tr><th style='text-align:left'>"
                        "resource</th><th>estimated</th><th>measured</th><th>device use</th></tr>")  # fmt: skip
            for key, (used, cap) in r.use().items():
                share = 100 * used / cap if cap else 0.0
                colour = "#b00020" if cap is not None and used > cap else "#4a7fb5"
                bar = (f"<div style='width:120px;background:#eee'><div style='width:{min(share, 100):.0f}%;"
                       f"height:8px;background:{colour}'></div></div>{share:.1f} % of {cap}") if cap else "-"
                rows.append(f"<tr><td>{_NAMES[key]}</td><td>{est.get(key, '-')}</td><td>{used}</td>"
                            f"<td>{bar}</td></tr>")  # fmt: skip
            rows.append("</table>")
            rest = [ln.strip() for ln in self.text.splitlines() if "clock" in ln or "latency" in ln or "tools" in ln]
            rows += [f"<div>{html.escape(ln)}</div>" for ln in rest]
        self.figures.value = "".join(rows)
