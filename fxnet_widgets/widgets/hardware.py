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
from .hardware_view import bar_html, resource_rows, settings_of, tools_line
from .session import Session
from .status import plan_widths

__all__ = ["HardwarePanel", "CLOCK_MHZ", "PIPELINES"]

#: the clock chooser's entry for a clock given in MHz rather than by a video format
CLOCK_MHZ = "clock (MHz)"
#: the pipeline chooser: "auto" (register stages placed for the clock) or a count of stages
PIPELINES: tuple[str | int, ...] = ("auto", *range(0, 33))


class HardwarePanel(w.VBox):
    """Target, clock and pipeline choosers, "synthesize" / "stop", progress, and the measured figures.

    Parameters
    ----------
    session
        The session whose network and current plan are synthesized.
    target, video, clock_mhz, pipeline
        Initial target (one of ``TARGETS``), video format (or :data:`CLOCK_MHZ` to use ``clock_mhz``)
        and pipeline (``"auto"``: register stages placed for the clock, or a count, see :data:`PIPELINES`).
    run
        The synthesis function, called as ``run(network, plan, target=..., video=..., clock_mhz=...,
        pipeline=..., progress=..., cancel=...)`` (default :func:`~fxnet_widgets.core.synth.synthesize`).
        With the default, a missing tool is told in one line at once (a PATH look-up, no tool is run)
        and the button stays off until the target changes to one whose tools are there.

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
        pipeline: str | int = "auto", run: Callable[..., SynthesisResult] | None = None, **kwargs: Any,
    ) -> None:  # fmt: skip
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        if target not in TARGETS:
            raise ValueError(f"target must be one of {', '.join(TARGETS)}, not {target!r}")
        if video not in (*VIDEO_FORMATS, CLOCK_MHZ):
            raise ValueError(f"video must be one of {', '.join(VIDEO_FORMATS)} or {CLOCK_MHZ!r}, not {video!r}")
        if pipeline not in PIPELINES or isinstance(pipeline, bool):
            raise ValueError(f"pipeline must be 'auto' or an integer from 0 to {PIPELINES[-1]}, not {pipeline!r}")
        self.session = session
        self._run_fn = run or synthesize
        self._needs_tools = run is None
        self.target = w.Dropdown(options=list(TARGETS), value=target, description="target")
        self.clock = w.Dropdown(options=[*VIDEO_FORMATS, CLOCK_MHZ], value=video, description="clock")
        self.clock_mhz = w.BoundedFloatText(value=clock_mhz, min=0.001, max=9999.0, step=0.25, description="MHz")
        self.pipeline = w.Dropdown(options=[(str(p), p) for p in PIPELINES], value=pipeline, description="pipeline")
        self.button = w.Button(description="synthesize", button_style="primary", icon="microchip")
        self.stop_button = w.Button(description="stop", disabled=True, icon="stop")
        self.progress = w.FloatProgress(value=0.0, min=0.0, max=1.0, description="")
        self.message = w.Label("")
        self.tools_note = w.HTML("")
        self.stale = w.HTML("")
        self.figures = w.HTML("")
        self.caution = w.HTML(f"<small style='color:#555'>{html.escape(CAUTION)}</small>")
        self.result: SynthesisResult | None = None
        self.result_plan: Plan | None = None
        self.result_network: Any = None  # the network it was computed with (the explorer's refine swaps networks)
        self._result_args: dict[str, Any] | None = None
        self._estimated: tuple[Any, dict[str, int] | None] = (None, None)
        self.error = ""
        self._thread: threading.Thread | None = None
        self._cancel = threading.Event()
        self._lock = threading.Lock()
        self.button.on_click(lambda _b: self.start())
        self.stop_button.on_click(lambda _b: self.stop())
        session.observe(lambda _c: self._show(), names=["plan"])
        session.add_view("hardware", lambda _r: self._show())  # a network swap (refine) redraws every view
        for chooser in (self.target, self.clock, self.clock_mhz, self.pipeline):
            chooser.observe(lambda _c: self._show(), names=["value"])
        controls = w.HBox([self.target, self.clock, self.clock_mhz, self.pipeline],
                          layout=w.Layout(flex_flow="row wrap"))  # fmt: skip
        actions = w.HBox([self.button, self.stop_button, self.progress, self.message])
        super().__init__([controls, actions, self.tools_note, self.stale, self.figures, self.caution], **kwargs)
        self.add_class("fxnet-hardware")
        self._show()

    @property
    def running(self) -> bool:
        return self._thread is not None and self._thread.is_alive()

    @property
    def is_stale(self) -> bool:
        """True when the shown result was computed for another plan (or network) than the session's current one."""
        return self.result is not None and (
            self.result_plan != self.session.plan or self.result_network != self.session.network
        )

    @property
    def stale_what(self) -> str:
        """What a stale result was computed for: "another plan (...)" or "another network (...)"."""
        if self.result_plan is not None and self.result_plan != self.session.plan:
            return f"another plan ({plan_widths(self.result_plan)})"
        return "another network (other weights under this plan, e.g. refined or plain)"

    @property
    def result_settings(self) -> dict[str, Any] | None:
        """The choices the shown result was computed with (target, pipeline, video, clock_mhz), or None."""
        return dict(self._result_args) if self._result_args is not None else None

    @property
    def missing(self) -> str:
        """One line naming the tools the chosen target needs that are not installed ("" when none)."""
        return tools_line(self.target.value) if self._needs_tools else ""

    def _clock_args(self) -> dict[str, Any]:
        if self.clock.value == CLOCK_MHZ:
            return {"video": None, "clock_mhz": float(self.clock_mhz.value)}
        return {"video": self.clock.value, "clock_mhz": None}

    def _chosen(self) -> dict[str, Any]:
        return {"target": self.target.value, "pipeline": self.pipeline.value, **self._clock_args()}

    def start(self) -> None:
        """Synthesize the session's current plan in a background thread (ignored while one runs)."""
        with self._lock:
            if self.running:
                return
            gone = self.missing
            if gone:
                self.error, self.message.value = gone, "tools missing"
                self._show()
                return
            plan, network = self.session.plan, self.session.network
            args = self._chosen()
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
            self.result, self.result_plan, self._result_args = result, plan, args
            self.result_network = network
            self.message.value = "done (from the cache)" if result.cached else "done"
            self.progress.value, self.progress.bar_style = 1.0, "success"
        finally:
            self.button.disabled, self.stop_button.disabled = False, True
            self._show()

    def estimates(self) -> dict[str, int] | None:
        """The calibrated estimates for the result's plan and target (None: no result, or no calibration)."""
        if self.result is None or self.result_plan is None:
            return None
        key = (self.result.key, self.result_plan, self.result_network)
        if self._estimated[0] != key:
            try:
                est = hardware_cost(self.result_network, self.result_plan, target=self.result.target).estimated()
            except ValueError:
                est = None  # no calibration for this target
            self._estimated = (key, est)
        return self._estimated[1]

    def _other_settings(self) -> str:
        """A note when the choosers now differ from what the shown result was computed for."""
        if self.result is None or self._result_args is None or self._result_args == self._chosen():
            return ""
        return (f"note: these figures are for {settings_of(self.result)}, pipeline {self._result_args['pipeline']}; "
                "press synthesize for the chosen settings")  # fmt: skip

    @staticmethod
    def _after_resources(r: SynthesisResult) -> list[str]:
        """Fit, maximum clock against the required one, latency and tool versions."""
        lines = [] if r.fits else [f"does NOT fit: needs {'; '.join(r.overflows())}"]
        if r.fmax_mhz is not None:
            lines.append(f"maximum clock: {r.fmax_mhz:.2f} MHz (nextpnr, seed {r.seed})")
        verdict = r.clock_verdict()
        if verdict is not None:
            lines.append(verdict)
        if r.latency is not None:
            lines.append(f"latency: {r.latency} clocks")
        lines.append("tools: " + "; ".join(r.tools.values()))
        return lines

    @property
    def text(self) -> str:
        """The figures as plain text: stale note, resources (estimated, measured, of the device), clock."""
        lines = []
        if self.error:
            lines.append(f"error: {self.error}")
        elif self.missing:
            lines.append(self.missing)
        r = self.result
        if r is None:
            lines.append("not synthesized yet: press synthesize")
            return "\n".join(lines)
        if self.is_stale:
            lines.append(f"stale: these figures are for {self.stale_what}, not the current one")
        if self._other_settings():
            lines.append(self._other_settings())
        lines.append(f"{r.target} ({r.device})")
        lines += ["  " + row.text() for row in resource_rows(r, self.estimates())]
        lines += ["  " + ln for ln in self._after_resources(r)]
        return "\n".join(lines)

    def _show(self) -> None:
        self.clock_mhz.disabled = self.clock.value != CLOCK_MHZ
        gone = self.missing
        self.tools_note.value = f"<div style='color:#b00020'>{html.escape(gone)}</div>" if gone else ""
        if not self.running:
            self.button.disabled = bool(gone)
        r = self.result
        notes = []
        if self.is_stale:
            notes.append(f"<b style='color:#b06000'>stale: these figures are for {html.escape(self.stale_what)}, "
                         "not the current one</b>")  # fmt: skip
        if self._other_settings():
            notes.append(f"<span style='color:#b06000'>{html.escape(self._other_settings())}</span>")
        self.stale.value = "<br>".join(notes)
        rows = [f"<div style='color:#b00020'>{html.escape(self.error)}</div>"] if self.error else []
        if r is None:
            rows.append("<div class='fxnet-hw-empty'>not synthesized yet: press synthesize</div>")
        else:
            rows.append(f"<div><b>{html.escape(r.target)}</b> ({html.escape(r.device)})</div>")
            rows.append("<table class='fxnet-hw-table' style='font-size:12px;border-collapse:collapse'><tr>"
                        "<th style='text-align:left'>resource</th><th>estimated</th><th>measured</th>"
                        "<th>device use</th></tr>")  # fmt: skip
            for row in resource_rows(r, self.estimates()):
                cap = f" of {row.capacity}" if row.capacity is not None else ""
                rows.append(f"<tr><td>{row.name}</td><td>{'-' if row.estimated is None else row.estimated}</td>"
                            f"<td>{row.measured}</td><td>{bar_html(row.share, row.over)}{cap}</td></tr>")  # fmt: skip
            rows.append("</table>")
            rows += [f"<div>{html.escape(ln)}</div>" for ln in self._after_resources(r)]
        self.figures.value = "".join(rows)
        self.caution.value = f"<small style='color:#555'>{html.escape(r.caution if r is not None else CAUTION)}</small>"
