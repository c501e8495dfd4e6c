"""A clip under the explorer's plan: a per-frame timeline and a frame scrubber.

:class:`FootagePanel` holds the decoded frames of a short clip, runs
:func:`~fxnet_widgets.core.footage.analyse_footage` (the core; colour look-ups cached by
value) for the explorer's plan in a background thread, and draws what it returns: a bqplot
timeline of the pixels that differ from float and of the events per frame (click a point to
jump there), a frame slider with a play button, the frame and the fixed-vs-float difference.
When the explorer's plan changes the timeline is recomputed (progress shown); until it is
done the panel says that what it shows belongs to another plan.

The explorer follows the frame: moving the slider (or play, or a click on the timeline) gives
the session that frame as its image (with its label mask when the panel has labels), through
:meth:`Session.set_image <fxnet_widgets.widgets.data.replace_image>` and the session's normal
update loop, so the preview, metrics, events and histograms all show it; the panel says which
frame the explorer shows. Unticking "explorer follows the frame", or closing the panel, gives
the session back the image it had before.
"""

from __future__ import annotations

import html
import os
import threading
from typing import Any

import bqplot as bq
import ipywidgets as w
import numpy as np

from ..core.footage import FootageAnalysis, analyse_footage, compile_float_lookup, compile_lookup, open_footage
from ..core.footage.analyse import frame_decisions
from ..core.plan import Plan
from ..render.raster import overlay_png, png_bytes
from .session import Session

__all__ = ["FootagePanel", "MAX_HELD_BYTES"]

#: the most decoded frame bytes a panel holds in memory (use a frame range or stride for more)
MAX_HELD_BYTES = 512 * 2**20


class FootagePanel(w.VBox):
    """Timeline of a clip under the explorer's plan, with a frame scrubber.

    Parameters
    ----------
    explorer
        An :class:`~fxnet_widgets.widgets.explorer.Explorer` or a :class:`Session`.
    source
        A video file, image folder or glob pattern (see :func:`~fxnet_widgets.core.footage.open_footage`).
    frames
        ``"A:B:S"`` frame range and stride.
    background
        Recompute in a thread (default); False computes at once (tests, scripts).
    labels
        Label masks of the frames (a video or image folder, same frame indices, white = positive):
        the explorer gets each frame's mask as its image labels (class 1 where the first channel
        is at least 128), so its metrics show accuracy on the frame.
    follow
        Start with the explorer following the frame (default True).

    Attributes
    ----------
    result : FootageAnalysis or None
        The timeline on screen; ``result.plan`` is the plan it was computed for.
    slider, play : the current frame (linked with ``jslink``)
    timeline : bqplot.Figure with ``differ_line``, ``events_line``, ``points`` (click to jump), ``cursor``
    frame_image, diff_image : ipywidgets.Image (PNG of the frame; the frame dimmed, disagreement coloured)
    progress : ipywidgets.IntProgress; status : ipywidgets.HTML
    follow : ipywidgets.Checkbox (the explorer shows the current frame); explorer_note : ipywidgets.HTML
    """

    def __init__(self, explorer: Any, source: str | os.PathLike[str], frames: str | None = None, *,
                 background: bool = True, width: int = 320, labels: str | os.PathLike[str] | None = None,
                 follow: bool = True, **kwargs: Any) -> None:  # fmt: skip
        session = getattr(explorer, "session", explorer)
        if not isinstance(session, Session):
            raise TypeError(f"explorer must be an Explorer or a Session, not {type(explorer).__name__}")
        self.session = session
        self.background = background
        clip = open_footage(source, frames)
        info = clip.info
        per_frame = info.width * info.height * 3
        if info.frames is not None and per_frame * info.frames > MAX_HELD_BYTES * max(1, clip.frames.step):
            raise ValueError(f"{info.source}: clip must hold at most {MAX_HELD_BYTES // per_frame} frames in memory "
                             f"for the panel, not about {info.frames}; give a frame range or stride")  # fmt: skip
        self.frames = clip.read()
        self.info = info
        self._masks: dict[int, np.ndarray] | None = None
        if labels is not None:
            self._masks = {m.index: np.asarray(m.rgb[..., 0] >= 128).astype(np.uint8)
                           for m in open_footage(labels, frames).read()}  # fmt: skip
        self._original = session.data  # given back when following stops or the panel closes
        self._following: int | None = None
        self.result: FootageAnalysis | None = None
        self._thread: threading.Thread | None = None
        self._cancel = threading.Event()
        self._closed = False
        self._network: Any = None  # the network the last timeline was started for
        self._lock = threading.Lock()
        n = len(self.frames)
        self.slider = w.IntSlider(0, 0, max(0, n - 1), description="frame", continuous_update=True,
                                  layout=w.Layout(width="420px"))  # fmt: skip
        rate = info.rate or 10.0
        self.play = w.Play(value=0, min=0, max=max(0, n - 1), interval=max(20, int(1000 / rate)), description="play")
        self._link = w.jslink((self.play, "value"), (self.slider, "value"))
        h = max(1, round(width * info.height / info.width))
        lay = {"width": f"{width}px", "height": f"{h}px"}
        self.frame_image = w.Image(format="png", layout=w.Layout(**lay))
        self.diff_image = w.Image(format="png", layout=w.Layout(**lay))
        self.caption = w.HTML()
        self.status = w.HTML()
        self.follow = w.Checkbox(value=bool(follow), description="explorer follows the frame", indent=False)
        self.explorer_note = w.HTML()
        self.progress = w.IntProgress(value=0, min=0, max=max(1, n), description="timeline",
                                      layout=w.Layout(width="420px"))  # fmt: skip
        # the timeline
        self.xs, self.ys = bq.LinearScale(), bq.LinearScale(min=0.0)
        sc = {"x": self.xs, "y": self.ys}
        x = np.arange(n, dtype=np.float32)
        zeros = np.zeros(n, dtype=np.float32)
        self.differ_line = bq.Lines(x=x, y=zeros, scales=sc, colors=["#d62d7b"], labels=["pixels differing"],
                                    display_legend=True)  # fmt: skip
        self.events_line = bq.Lines(x=x, y=zeros, scales=sc, colors=["#1aaabe"], labels=["events"],
                                    display_legend=True, line_style="dashed")  # fmt: skip
        self.points = bq.Scatter(x=x, y=zeros, scales=sc, colors=["#d62d7b"], default_size=24,
                                 interactions={"click": "select"})  # fmt: skip
        self.points.on_element_click(self._clicked)
        self.cursor = bq.Lines(x=np.zeros(2, np.float32), y=np.array([0, 1], np.float32), scales=sc,
                               colors=["#888888"])  # fmt: skip
        self.timeline = bq.Figure(
            marks=[self.differ_line, self.events_line, self.points, self.cursor],
            axes=[bq.Axis(scale=self.xs, label="frame"), bq.Axis(scale=self.ys, side="left",
                                                                   label="pixels", tick_format="~s")],
            title="per frame: pixels differing from float, events", legend_location="top-left",
            fig_margin={"top": 40, "bottom": 40, "left": 60, "right": 10},
            layout=w.Layout(width="640px", height="260px"),
        )  # fmt: skip
        cells = [w.VBox([w.HTML("<b>frame</b>"), self.frame_image]),
                 w.VBox([w.HTML("<b>where fixed point and float differ</b>"), self.diff_image])]  # fmt: skip
        wrap = w.Layout(flex_flow="row wrap", align_items="flex-start")
        super().__init__([self.status, self.timeline, w.HBox([self.play, self.slider]), self.progress,
                          w.HBox([self.follow, self.explorer_note]), w.HBox(cells, layout=wrap), self.caption],
                         **kwargs)  # fmt: skip
        self.slider.observe(lambda _: self._slider_moved(), "value")
        self.follow.observe(lambda _: self._follow_changed(), "value")
        self._on_plan = lambda _: self.recompute()
        session.observe(self._on_plan, "plan")
        # a network swap (the explorer's refine) redraws every view: recompute for the new network
        session.add_view("footage", lambda _r: self.recompute() if self._other_network() else None)
        self._follow_changed()
        self.recompute()

    # -- computing (in the core, possibly in a thread) -----------------------------------
    def recompute(self) -> None:
        """Start the timeline for the explorer's current plan (the previous run is cancelled)."""
        plan, self._network = self.session.plan, self.session.network
        with self._lock:
            self._cancel.set()
            self._cancel = cancel = threading.Event()
        self.progress.value = 0
        self._say()
        if not self.background:
            self._run(plan, self._network, cancel)
            return
        self._thread = threading.Thread(target=self._run, args=(plan, self._network, cancel), daemon=True,
                                        name="fxnet-footage")  # fmt: skip
        self._thread.start()

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for the background run; True when it has finished."""
        th = self._thread
        if th is not None:
            th.join(timeout)
            return not th.is_alive()
        return True

    def _other_network(self) -> bool:
        """True when the last timeline was started for another network than the session's (not after close)."""
        return not self._closed and self._network != self.session.network

    def _run(self, plan: Plan, network: Any, cancel: threading.Event) -> None:
        try:
            result = analyse_footage(network, plan, self.frames, cancel=cancel,
                                     reference=self.session.data.reference,
                                     progress=lambda d, t: self._progress(d, cancel),
                                     source_info=self.info.to_dict())  # fmt: skip
        except Exception as exc:  # shown, never only logged
            self.status.value = f"<span style='color:#b00'>timeline failed: {html.escape(str(exc))}</span>"
            return
        if result.cancelled or cancel.is_set():
            return
        with self._lock:
            if cancel is not self._cancel:
                return
            self.result = result
        self._draw()

    def _progress(self, done: int, cancel: threading.Event) -> None:
        if cancel is self._cancel:
            self.progress.value = done

    # -- drawing ---------------------------------------------------------------------
    @property
    def stale(self) -> bool:
        """True when the timeline on screen is for another plan (or network, after refine) than the explorer's."""
        r = self.result
        return r is None or r.plan != self.session.plan or r.network != self.session.network

    def _say(self) -> None:
        if self.result is None:
            self.status.value = "<i>computing the timeline for the explorer's plan...</i>"
        elif self.stale:
            self.status.value = ("<span style='color:#b05000'><b>stale:</b> the timeline and the frame are for an "
                                 "earlier plan, not the explorer's; recomputing...</span>")  # fmt: skip
        else:
            t = self.result.totals
            self.status.value = (f"timeline for the explorer's plan: {t['frames']} frames, {t['differ']} pixels "
                                 f"differ from float, events {sum(t['events'].values())}")  # fmt: skip

    def _draw(self) -> None:
        r = self.result
        assert r is not None
        x = np.arange(len(r.frames), dtype=np.float32)  # position in the clip
        differ = r.series("differ").astype(np.float32)
        events = r.series("events").astype(np.float32)
        top = float(max(1.0, differ.max(initial=0), events.max(initial=0)))
        with self.timeline.hold_sync():
            self.differ_line.x, self.differ_line.y = x, differ
            self.events_line.x, self.events_line.y = x, events
            self.points.x, self.points.y = x, differ
            self.ys.max = top * 1.3  # headroom: the legend (top left) sits above the lines, not on them
            self.cursor.y = np.array([0, top * 1.3], np.float32)
        self.progress.value = self.progress.max
        self._say()
        self._show_frame()

    def _clicked(self, _mark: Any, event: dict[str, Any]) -> None:
        i = int(event.get("data", {}).get("index", 0))
        self.slider.value = max(0, min(i, self.slider.max))

    def _show_frame(self) -> None:
        if not self.frames:
            return
        i = int(self.slider.value)
        f = self.frames[i]
        self.cursor.x = np.array([i, i], np.float32)
        self.frame_image.value = png_bytes(f.rgb)
        r = self.result
        if r is None:
            return
        fx, fl = self.frame_difference(i)
        self.diff_image.value = overlay_png(f.rgb, fx, fl, max(2, r.network.n_out), rings=True)
        rec = r.frames[i]
        ev = sum(sum(sum(row) for row in v) for v in rec["events"].values())
        plan_note = " (for an earlier plan)" if self.stale else ""
        self.caption.value = (f"frame {rec['index']} at {rec['time_s']:.3f} s: {rec['differ']} of {rec['pixels']} "
                              f"pixels differ from float, {ev} events{plan_note}")  # fmt: skip

    # -- the explorer follows the frame ------------------------------------------------
    def frame_note(self, position: int) -> str:
        """How the explorer names the frame at ``position`` (its image note)."""
        f = self.frames[position]
        return f"frame {f.index} at {f.time_s:.3f} s of {os.path.basename(str(self.info.source))}"

    @property
    def explorer_frame(self) -> int | None:
        """The position of the frame the explorer shows now, or None (it shows another image)."""
        i = self._following
        if i is None or self.session.image_note != self.frame_note(i):
            return None
        return i

    def _slider_moved(self) -> None:
        if self.follow.value:
            self._show_in_explorer(int(self.slider.value))
        self._show_frame()

    def _show_in_explorer(self, i: int) -> None:
        f = self.frames[i]
        mask = self._masks.get(f.index) if self._masks is not None else None
        with self.session.deferred():  # from the page: coalesced, the latest frame wins
            self.session.set_image(f.rgb, mask, self.frame_note(i))
        self._following = i
        self._say_explorer()

    def _follow_changed(self) -> None:
        if self.follow.value and self.frames:
            self._show_in_explorer(int(self.slider.value))
        else:
            self._give_back()

    def _give_back(self) -> None:
        if self._following is not None:
            self._following = None
            if self.session.data is not self._original:
                self.session.set_image(self._original)
        self._say_explorer()

    def _say_explorer(self) -> None:
        i = self.explorer_frame
        if i is None:
            self.explorer_note.value = "the explorer shows its own image, not a frame of the clip"
            return
        labels = ""
        if self._masks is not None:
            has = self.frames[i].index in self._masks
            labels = ", with its labels" if has else ", no label mask for this frame"
        self.explorer_note.value = f"the explorer shows <b>{html.escape(self.frame_note(i))}</b>{labels}"

    def close(self) -> None:
        """Stop the background run, stop following the plan, give the explorer its image back, close."""
        if hasattr(self, "_on_plan"):  # (a panel whose construction failed has nothing to stop)
            self._closed = True
            self._cancel.set()
            try:
                self.session.unobserve(self._on_plan, "plan")
            except ValueError:
                pass
            self._give_back()
        super().close()

    def frame_difference(self, position: int) -> tuple[np.ndarray, np.ndarray]:
        """Fixed-point and float decisions of the frame at ``position``, under the timeline's plan."""
        r = self.result
        if r is None:
            raise ValueError("the timeline is not computed yet (call wait())")
        return frame_decisions(compile_lookup(r.network, r.plan), compile_float_lookup(r.float_network),
                               self.frames[position].rgb)  # fmt: skip

    def summary(self) -> str:
        """Deterministic text of what the panel shows."""
        if self.result is None:
            return "footage: timeline not computed yet"
        i = int(self.slider.value)
        rec = self.result.frames[i]
        shown = self.explorer_frame
        return (self.result.summary() + f"\n  current frame {rec['index']}: {rec['differ']} pixels differ"
                + ("\n  stale: computed for another plan than the explorer's" if self.stale else "")
                + (f"\n  the explorer shows {self.frame_note(shown)}" if shown is not None else ""))
