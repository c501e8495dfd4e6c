"""The explorer: every view on one session, in a layout that fits a notebook.

>>> from fxnet_widgets import Explorer  # doctest: +SKIP
>>> ex = Explorer.demo()                 # doctest: +SKIP
>>> ex                                   # doctest: +SKIP
>>> ex.plan.save("my-plan.json")         # doctest: +SKIP
"""

from __future__ import annotations

import html
from pathlib import Path
from typing import Any

import ipywidgets as w

from ..core.images import read_image
from ..core.network import Network
from ..core.plan import Plan
from .boundary import BoundaryPanel, CubePanel
from .controls import PlanControlsPanel
from .events import EventsPlot, HistogramsPanel
from .hardware import HardwarePanel
from .metrics import MetricsPanel
from .preview import PreviewPanel
from .refining import RefinePanel
from .session import Session
from .status import StatusLinePanel

__all__ = ["Explorer", "demo_explorer", "DEMO_ASSETS"]

#: the demo files (produce-sorting line: ripe fruit by colour)
DEMO_ASSETS = Path(__file__).resolve().parents[2] / "assets"


def _wrap_row(children: list[w.Widget]) -> w.HBox:
    """A row that wraps onto the next line when the notebook is narrow (children keep their size)."""
    return w.HBox(children, layout=w.Layout(flex_flow="row wrap", align_items="flex-start", width="100%"))


def _section(title: str, body: w.Widget) -> w.VBox:
    head = w.HTML(f"<h3 style='margin:14px 0 4px 0;font-size:15px'>{html.escape(title)}</h3>")
    box = w.VBox([head, body], layout=w.Layout(border_top="1px solid #ccc", margin="6px 0 0 0"))
    box.add_class("fxnet-section")
    return box


class Explorer(w.VBox):
    """Controls, status line, slices, cube, events, histograms, preview and metrics.

    Below the controls and the status line come titled sections, all shown at
    once (:attr:`sections`): "decision boundary" (slices and cube, for three
    inputs), "refine" (:attr:`refining`, a :class:`~fxnet_widgets.widgets.refining.RefinePanel`:
    better integers for the current plan, swapped in and out), "image" (with an image),
    "overflow and clamps" and "hardware" (:attr:`hardware`, a
    :class:`~fxnet_widgets.widgets.hardware.HardwarePanel`: synthesis of the current plan by the
    open-source tools, in the background, only when its button is pressed).

    Parameters
    ----------
    network
        The float network (or a path to its file).
    image
        Optional H x W x 3 uint8 codes or an image path.
    samples, labels
        Optional N x 3 codes and labels; ``labels`` may instead be H x W, for the image.
    image_labels
        Optional H x W labels of the image (accuracy in the metrics panel).
    plan
        Starting plan (or a path); default: :func:`~fxnet_widgets.widgets.session.default_plan`.
    session_options
        Passed to :class:`~fxnet_widgets.widgets.session.Session` (``slice_points``...).
    """

    def __init__(
        self,
        network: Network | str | Path,
        image: Any = None,
        samples: Any = None,
        labels: Any = None,
        plan: Plan | str | Path | None = None,
        *,
        image_labels: Any = None,
        **session_options: Any,
    ) -> None:
        if isinstance(network, (str, Path)):
            network = Network.load(network)
        if isinstance(plan, (str, Path)):
            plan = Plan.load(plan, network)
        self.session = Session(
            network, image=image, samples=samples, labels=labels, plan=plan, image_labels=image_labels,
            **session_options,
        )  # fmt: skip
        s = self.session
        self.status = StatusLinePanel(s)
        self.controls = PlanControlsPanel(s)
        #: "metrics and cost": the figures at a glance, every figure under its collapsed "details"
        self.metrics = MetricsPanel(s, layout=w.Layout(width="560px", flex="0 1 auto"))
        self.events = EventsPlot(s)
        self.histograms = HistogramsPanel(s)
        parts: list[tuple[str, w.Widget]] = []
        self.boundary = self.cube = None
        if s.cube_ok:
            self.boundary = BoundaryPanel(s)
            self.cube = CubePanel(s)
            parts.append(("decision boundary", _wrap_row([self.boundary, self.cube])))
        self.preview = None
        if s.image is not None:
            self.preview = PreviewPanel(s)
            parts.append(("image", self.preview))
        parts.append(("overflow and clamps", w.VBox([self.events, self.histograms])))
        self.hardware = HardwarePanel(s)  # cheap: no tool runs until "synthesize" is pressed
        parts.append(("hardware", self.hardware))
        # made after the slices: its view runs after theirs and draws the other network's outline on them
        self.refining = RefinePanel(s, self.boundary)
        parts.insert(1 if s.cube_ok else 0, ("refine", self.refining))
        # titled sections, all shown at once: a figure in a hidden tab is drawn at zero size (bqplot
        # then logs negative <rect> sizes), and a report embeds the widgets with no kernel to redraw them
        self.sections: dict[str, w.VBox] = {title: _section(title, body) for title, body in parts}
        top = _wrap_row([self.controls, self.metrics])
        #: how the starting plan was chosen (per layer: the range its output format holds), if it was
        self.start_note = (
            w.HTML(
                "<details><summary>starting plan: how each layer's formats were chosen</summary><ul>"
                + "".join(f"<li>{html.escape(n)}</li>" for n in s.start_notes)
                + "</ul></details>"
            )
            if s.start_notes
            else None
        )
        head = [top, self.status] + ([self.start_note] if self.start_note is not None else [])
        super().__init__([*head, *self.sections.values()])
        self.add_class("fxnet-explorer")

    @classmethod
    def demo(cls, assets: str | Path | None = None, samples: int = 300) -> Explorer:
        """The demo: the produce-sorting network, its plan, the test scene and its mask.

        ``samples`` labelled pixels of the test scene (drawn with a fixed seed,
        balanced between classes) are shown as points on the slices.
        """
        from ..core.labels import labels_from_mask, sample_pixels

        root = Path(assets) if assets is not None else DEMO_ASSETS
        net = Network.load(root / "network.json")
        plan = Plan.load(root / "plan.json", net)
        img = read_image(root / "scene-test.png")
        pixels = labels_from_mask(img.codes, read_image(root / "scene-test-mask.png").codes)
        h, wd = img.shape
        image_labels = pixels.labels.reshape(h, wd)
        if not samples:
            return cls(net, image=img, plan=plan, image_labels=image_labels)
        split = sample_pixels(pixels, n=max(int(samples), 4), validation=0.5, seed=0)
        return cls(net, image=img, samples=split.val_codes, labels=split.val_labels, plan=plan,
                   image_labels=image_labels)  # fmt: skip

    @property
    def plan(self) -> Plan:
        """The current plan (a value: save it with ``explorer.plan.save(path)``)."""
        return self.session.plan

    @plan.setter
    def plan(self, plan: Plan) -> None:
        self.session.plan = plan

    def compare(self, plan_b: Plan | None = None, plan_a: Plan | None = None) -> Any:
        """Plan A (default: the current plan) against ``plan_b`` (default: B follows the current plan).

        Returns a :class:`~fxnet_widgets.widgets.compare.ComparePanel` (display it; ``.text`` reads it).
        """
        from .compare import ComparePanel

        return ComparePanel(self, plan_a=plan_a, plan_b=plan_b)

    def summary(self) -> str:
        """Deterministic text of what the views show (for notebooks and reports); with a refinement, its state."""
        refined = "" if self.refining.refinement is None else "\n" + self.refining.summary()
        return self.session.summary() + "\nstatus: " + self.status.text + refined

    def save_report(
        self, path: str | Path, *, offline_bundles: str | Path | None = None, title: str | None = None
    ) -> Path:
        """Write a one-file HTML report of the current state (see :func:`fxnet_widgets.report.save_report`).

        The report reads the session without JavaScript (tables and pictures rendered in Python)
        and carries this explorer's widgets with their state; ``offline_bundles`` makes it open offline.
        """
        from ..report import save_report

        return save_report(self.session, path, widget=self, summary=self.summary(),
                           offline_bundles=offline_bundles, title=title)  # fmt: skip

    def __repr__(self) -> str:
        shape = "-".join(map(str, self.session.network.shape))
        return f"<Explorer {shape}: {self.plan!r}>"

    def _repr_mimebundle_(self, **kwargs: Any) -> dict[str, Any] | None:
        """The widget view, with the full summary as its plain text (what a page without JavaScript shows)."""
        data = super()._repr_mimebundle_(**kwargs)
        if data:
            shape = "-".join(map(str, self.session.network.shape))
            data["text/plain"] = f"<Explorer {shape}>\n{self.summary()}"
        return data


def demo_explorer(assets: str | Path | None = None) -> Explorer:
    """:meth:`Explorer.demo` as a function (the quick-start notebook calls it)."""
    return Explorer.demo(assets)
