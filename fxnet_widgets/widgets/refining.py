"""The explorer's "refine" panel: better integers for the current plan, swapped in and out.

:class:`RefinePanel` runs :func:`~fxnet_widgets.core.refine.refine` on the
session's data in a background thread (progress bar, "stop"), then swaps the
refined network in for the plan it was computed for, shows a before/after line
(disagreement with the original float network on the samples refined on and on
the held-out ones) and offers a toggle back to plain rounding. The slices then
carry both boundaries: the shown network's as the heat map, the other's as a
dotted outline.

A refinement belongs to its plan. When the plan changes, the panel says the
refinement is stale, the views go back to the plain network (the refined
weights are exact only under the old plan) and the button offers a re-run; if
the plan comes back, the refinement may be shown again.

A stopped run changes nothing: the plain network stays.
"""

from __future__ import annotations

import asyncio
import copy
import html
import threading
from typing import Any

import ipywidgets as w
import numpy as np

from ..core.kernel import emulate
from ..core.network import Network, as_codes
from ..core.plan import Plan
from ..core.refine import METHODS, Refinement, refine
from ..core.refine._api import PROGRESS_TOTAL
from .background import BackgroundRun
from .parts import slices_part
from .results import SessionResult
from .search_run import plan_q

__all__ = ["RefinePanel", "refine_codes"]


def refine_codes(session: Any, codes: Any = None, pixels: int = 20_000, seed: int = 0) -> tuple[np.ndarray, str]:
    """The N x n_in codes the panel refines on, and where they come from (one phrase).

    ``codes`` if given; else a seeded draw of up to ``pixels`` pixels of the session's image
    (all of them when it has fewer), else its samples, else the whole-cube grid.
    """
    net = session.network
    if isinstance(pixels, bool) or not isinstance(pixels, int) or pixels < 2:
        raise ValueError(f"pixels must be an integer of at least 2, not {pixels!r}")
    if codes is not None:
        flat, _ = as_codes(np.asarray(codes), net.input_bits, net.n_in, what="codes")
        return np.asarray(flat), f"{flat.shape[0]} given codes"
    if session.image is not None:
        flat = session.image.reshape(-1, net.n_in)
        if flat.shape[0] > pixels:
            pick = np.sort(np.random.default_rng(seed).choice(flat.shape[0], pixels, replace=False))
            return flat[pick], f"{pixels} of the image's {flat.shape[0]} pixels (seeded draw)"
        return flat, f"the image's {flat.shape[0]} pixels"
    if session.samples is not None:
        return session.samples, f"the {session.samples.shape[0]} samples"
    grid = session.data.cube_input
    if grid is None:
        raise ValueError("refine needs data: the session must have an image or samples, not neither")
    return grid, f"the {grid.shape[0]} points of the cube grid"


def whole_image(plain: Network, refined: Network, plan: Plan, image: np.ndarray) -> tuple[int, int, int]:
    """(plain, refined, pixels): decisions on every pixel of ``image`` that differ from ``plain``'s float pass."""
    ref = emulate(plain, plan, image)
    want = np.asarray(ref.float_decisions)
    got = np.asarray(emulate(refined, plan, image).decisions)
    return int(np.count_nonzero(np.asarray(ref.decisions) != want)), int(np.count_nonzero(got != want)), want.size


def _line(r: Refinement, image: tuple[int, int, int] | None, drawn: int) -> str:
    b, a = r.before, r.after
    text = (f"disagreement with the float network, plain rounding -> refined: {b.errors} -> {a.errors} of "
            f"{b.samples} refined on")  # fmt: skip
    if b.holdout_errors is not None:
        text += f"; {b.holdout_errors} -> {a.holdout_errors} of {b.holdout_samples} held out"
    if image is not None:
        where = "all of them refined on or held out" if drawn >= image[2] else f"{drawn} of them drawn"
        text += f"; {image[0]} -> {image[1]} of the image's {image[2]} pixels ({where})"
    return text


class RefinePanel(BackgroundRun, w.VBox):
    """Method choice, "refine" and "stop", progress, the before/after line and the plain/refined toggle.

    ``stop()`` ends a run with nothing swapped in (the plain network stays); ``join()`` waits
    for a background run and its swap.

    Parameters
    ----------
    session
        The explorer's session (its network when the panel is made is the plain one).
    boundary
        The explorer's :class:`~fxnet_widgets.widgets.boundary.BoundaryPanel` (None: no outline).
    codes, pixels, seed
        The data refined on (see :func:`refine_codes`); ``seed`` also seeds ``refine``.
    holdout_fraction
        Share of the codes held out (the "held out" figures; fine-tuning stops early on them).
    options
        More keyword arguments for :func:`~fxnet_widgets.core.refine.refine` (``budget_s``, ``steps``...).
    """

    def __init__(self, session: Any, boundary: Any = None, *, codes: Any = None, pixels: int = 20_000,
                 seed: int = 0, holdout_fraction: float = 0.25, **options: Any) -> None:  # fmt: skip
        self.session = session
        self.boundary = boundary
        #: the network plain rounding starts from (the session's when the panel was made)
        self.plain: Network = session.network
        self.codes, self.data_note = refine_codes(session, codes, pixels, seed)
        #: (plain, refined, pixels) disagreement on the whole image for the last refinement (None: no image)
        self.image_figures: tuple[int, int, int] | None = None
        self._from_image = codes is None and session.image is not None
        self._next_image: tuple[int, int, int] | None = None
        self.seed, self.holdout_fraction, self.options = seed, holdout_fraction, dict(options)
        self.method = w.ToggleButtons(options=list(METHODS), value="rounding", description="method",
                                      style={"button_width": "80px", "description_width": "50px"})  # fmt: skip
        self.run_button = w.Button(description="refine", button_style="primary")
        self.stop_button = w.Button(description="stop", disabled=True, button_style="warning")
        self.progress = w.IntProgress(value=0, min=0, max=PROGRESS_TOTAL, description="progress")
        self.use = w.ToggleButtons(options=[("plain rounding", "plain"), ("refined", "refined")], value="plain",
                                   description="network", disabled=True,
                                   style={"button_width": "110px", "description_width": "50px"})  # fmt: skip
        self.line = w.HTML("")
        #: the before/after line as plain text ("" before the first refinement)
        self.text = ""
        self.status = w.HTML("")
        self.note = w.HTML("")
        self.run_button.on_click(lambda _b: self._clicked())
        self.stop_button.on_click(lambda _b: self.stop())
        self.use.observe(self._toggled, names="value")
        about = w.HTML(f"<span style='font-size:12px'>chooses the integer weights and biases again for the "
                       f"current plan, on {html.escape(self.data_note)} ({100 * holdout_fraction:g} % of them "
                       "held out); exact under the plan, so the datapath takes them as they are</span>")  # fmt: skip
        super().__init__([about, w.HBox([self.method, self.run_button, self.stop_button, self.progress]),
                          self.status, self.line, self.use, self.note])  # fmt: skip
        self.add_class("fxnet-refine")
        #: the last finished (not stopped) refinement, or None
        self.refinement: Refinement | None = None
        #: "" when the last run worked, else its one-line error
        self.error = ""
        self._init_run()
        #: per slice, the fixed-point decisions the dotted outline is drawn from (None: no outline)
        self.outline: tuple[np.ndarray, ...] | None = None
        self._outline_key: Any = None
        self._show_status("plain rounding of the float weights (press refine to search for better integers)")
        session.add_view("refine", self._follow)

    # -- state ------------------------------------------------------------------------------
    @property
    def stale(self) -> bool:
        """True when the last refinement was computed for another plan than the current one."""
        return self.refinement is not None and self.refinement.plan != self.session.plan

    @property
    def shown(self) -> str:
        """``"refined"`` while the session computes with the refined network, else ``"plain"``."""
        return str(self.use.value)

    # -- running ----------------------------------------------------------------------------
    def run(self, wait: bool = False) -> None:
        """Refine for the current plan with the chosen method (``wait``: here and now, else in the background)."""
        if self._running:
            self._show_status("refused: a run is in progress (stop it first)", bad=True)
            raise RuntimeError("a refine run must end before the next starts, not overlap it")
        plan, method = self.session.plan, self.method.value
        try:
            loop: asyncio.AbstractEventLoop | None = asyncio.get_running_loop()
        except RuntimeError:
            loop = None  # no kernel loop (a script or a test): the result is applied from the worker
        self._running, self.error = True, ""
        self._stop.clear()
        self.progress.value = 0
        self.run_button.disabled, self.stop_button.disabled = True, False
        self._show_status(f"{method} running for plan {self._plan_text(plan)}")
        if wait:
            self._work(plan, method, None)
        else:
            self._thread = threading.Thread(target=self._work, args=(plan, method, loop), name="fxnet-refine",
                                            daemon=True)  # fmt: skip
            self._thread.start()

    def _clicked(self) -> None:
        try:
            self.run()
        except RuntimeError:
            pass  # the reason is on the panel already

    def _progress(self, done: int, total: int) -> None:
        self.progress.value = min(PROGRESS_TOTAL, done * PROGRESS_TOTAL // max(1, total))

    def _work(self, plan: Plan, method: str, loop: asyncio.AbstractEventLoop | None) -> None:
        outcome: Refinement | None = None
        self._next_image: tuple[int, int, int] | None = None
        try:
            outcome = refine(self.plain, plan, self.codes, method=method, seed=self.seed,
                             holdout_fraction=self.holdout_fraction, progress=self._progress,
                             stop=self._stop.is_set, **self.options)  # fmt: skip
            image = self.session.image
            if image is not None and not self._stop.is_set():
                self._next_image = whole_image(self.plain, outcome.network, plan, image)
        except Exception as exc:  # a failing run shows on the panel and changes nothing
            msg = str(exc).splitlines()[0] if str(exc) else ""
            self.error = f"{type(exc).__name__}: {msg}"
        if loop is not None and loop.is_running():
            loop.call_soon_threadsafe(self._finish, outcome)  # the session is changed on the kernel's thread
        else:
            self._finish(outcome)

    def _finish(self, outcome: Refinement | None) -> None:
        try:
            if self.error:
                self._show_status(f"refine failed, nothing changed: {self.error}", bad=True)
            elif self._stop.is_set() or outcome is None:
                self._show_status("stopped: nothing changed, the plain network stays")
            else:
                self.refinement, self.image_figures = outcome, self._next_image
                if not outcome.improved:  # the same integers: swapping would change only the views' float pass
                    self._show_status("no gain over plain rounding for this plan: nothing swapped in")
                    if self.use.value == "refined":
                        self.use.value = "plain"
                elif outcome.plan != self.session.plan:
                    self._show_status("refined for a plan that has changed since: not swapped in")
                    self._update_use()
                elif self.use.value == "refined":
                    self._swap("refined")  # a re-run for the plan shown: the new refined network
                else:
                    self.use.value = "refined"  # swaps it in (see _toggled)
        finally:
            self._running = False
            self.run_button.disabled, self.stop_button.disabled = False, True
            self._update_text()

    # -- which network ----------------------------------------------------------------------
    def _toggled(self, change: Any) -> None:
        if change["new"] == "refined" and (self.refinement is None or not self.refinement.improved or self.stale):
            self.use.value = "plain"  # nothing valid to show (the toggle is disabled then)
            return
        self._swap(change["new"])

    def _swap(self, which: str) -> None:
        net = self.refinement.network if which == "refined" and self.refinement is not None else self.plain
        if which == "refined" and self.refinement is not None:
            self._show_status(f"showing the refined network ({self.refinement.method})")
        elif not self.stale:
            self._show_status("showing plain rounding of the float weights")
        self.session.use_network(net)
        self._update_text()

    def _update_use(self) -> None:
        ok = self.refinement is not None and self.refinement.improved and not self.stale
        self.use.disabled = not ok
        self.run_button.description = "re-run for this plan" if self.stale else "refine"

    def _update_text(self) -> None:
        r = self.refinement
        self._update_use()
        if r is None:
            self.line.value = self.note.value = self.text = ""
            return
        head = f"<b>{html.escape(r.method)}</b>, for plan {html.escape(self._plan_text(r.plan))}: "
        if self.stale:
            head = ("<span style='color:#b00020'><b>stale</b>: computed for an earlier plan, not the one shown; "
                    "the views show plain rounding (press 're-run for this plan')</span><br>" + head)  # fmt: skip
        more = "" if r.improved else " (no gain: plain rounding's integers kept)"
        drawn = self.codes.shape[0] if self._from_image else 0
        text = _line(r, self.image_figures, drawn) + more
        self.text = ("stale (computed for an earlier plan): " if self.stale else "") + text
        self.line.value = f"<span style='font-size:12px'>{head}{html.escape(text)}</span>"
        self.note.value = (
            "<span style='font-size:12px'>the other views show the refined network's integers; their 'float' "
            "stays the original float network, as in the line above</span>" if self.shown == "refined" else ""
        )  # fmt: skip

    def _plan_text(self, plan: Plan) -> str:
        return plan_q(self.plain, plan).replace("\n", " | ")

    def _show_status(self, text: str, bad: bool = False) -> None:
        colour = "#b00020" if bad else "#2d6a2d"
        self.status.value = f"<span style='color:{colour};font-family:monospace'>{html.escape(text)}</span>"

    # -- following the session ----------------------------------------------------------------
    def _follow(self, result: SessionResult) -> None:
        """After every session update: stale check, then the other network's boundary on the slices."""
        r = self.refinement
        if r is not None and result.plan != r.plan and self.shown == "refined":
            self._show_status("the plan changed: back to plain rounding (the refinement is for the earlier plan)")
            self.use.value = "plain"  # swaps the plain network in; the session computes again
            return
        self._update_text()
        if self.boundary is None or result.slices is None:
            return
        if r is None or result.plan != r.plan or not r.improved:  # (no gain: the same integers, the same boundary)
            self.outline = None
            self.boundary.show_outline(None, "")
            return
        other, name = (self.plain, "plain rounding") if self.shown == "refined" else (r.network, "the refined network")
        data = copy.copy(self.session.data)
        data.network = other
        pos = tuple(sl.position for sl in sorted(result.slices, key=lambda s: s.fixed_input))
        key = (other.digest, result.plan, pos)
        if key != self._outline_key or self.outline is None:  # e.g. a full-resolution toggle: the same slices
            colours = None if data.samples is None else np.zeros(data.samples.shape[0], np.int64)  # points unused
            got = slices_part(data, result.plan, (pos[0], pos[1], pos[2]), colours)
            self.outline, self._outline_key = tuple(sl.fixed for sl in got), key
        shown = "; the heat map: the refined network" if self.shown == "refined" else ""
        self.boundary.show_outline(self.outline, f"dots: where the fixed-point decision of {name} changes{shown}")

    def summary(self) -> str:
        """Deterministic text (no timing): what is shown, and the refinement's figures."""
        r = self.refinement
        if r is None:
            return "refine: not run (plain rounding)"
        state = "stale (computed for an earlier plan)" if self.stale else f"showing {self.shown}"
        text = f"refine: {state}\n{r.summary()}"
        im = self.image_figures
        if im is not None:
            text += f"\n  whole image: plain {im[0]}, refined {im[1]} of {im[2]} pixels differ from the float network"
        return text
