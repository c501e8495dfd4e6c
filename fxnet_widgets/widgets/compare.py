"""Two plans side by side: pin plan A, compare any plan B (cost, events, disagreements, pictures of A against B).

:func:`compare_plans` computes (on an explorer session's data: the preview image,
the samples, the three slices); :class:`ComparePanel` draws. The pictures compare
A with B directly, not each with float: magenta where only B says the target
class, teal where only A does (several classes: magenta wherever they differ).

>>> cmp = explorer.compare(other_plan)   # doctest: +SKIP
>>> print(cmp.text)                      # doctest: +SKIP
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from typing import Any

import ipywidgets as w
import numpy as np

from ..core.analysis import COST_KEYS, HardwareCost, error_metrics, hardware_cost
from ..core.analysis.cost import CALIBRATED_KEYS
from ..core.kernel import EVENT_NAMES, emulate
from ..core.plan import Plan
from ..render.palette import slice_palette
from ..render.raster import comparison_codes, overlay_png, palette_png

__all__ = ["ComparePanel", "PlanComparison", "compare_plans", "SLICE_AXES"]

#: the three slices: (name, x input, y input, fixed input), as the explorer draws them
SLICE_AXES = (("R-G", 0, 1, 2), ("R-B", 0, 2, 1), ("G-B", 1, 2, 0))
#: rows where a larger B is better (every other row: smaller is better)
_HIGHER_BETTER = ("accuracy",)


@dataclass(frozen=True, eq=False)
class PlanComparison:
    """Both plans' decisions on the same data, their costs and events.

    ``image_*`` are H x W decisions (of the explorer's preview image), ``samples_*``
    N decisions, ``slices`` one ``(name, position, codes, a, b)`` per slice with
    ``a[iy, ix]`` the decision at inputs ``(codes[ix], codes[iy], position)``.
    """

    plan_a: Plan
    plan_b: Plan
    classes: tuple[str, ...]
    cost_a: HardwareCost
    cost_b: HardwareCost
    image_codes: np.ndarray | None
    image_a: np.ndarray | None
    image_b: np.ndarray | None
    samples_a: np.ndarray | None
    samples_b: np.ndarray | None
    slices: tuple[tuple[str, int, np.ndarray, np.ndarray, np.ndarray], ...]
    rows: tuple[tuple[str, float | None, float | None], ...]

    @property
    def image_differ(self) -> int | None:
        """Image pixels where A and B decide differently (None without an image)."""
        return None if self.image_a is None else int(np.count_nonzero(self.image_a != self.image_b))

    @property
    def samples_differ(self) -> int | None:
        return None if self.samples_a is None else int(np.count_nonzero(self.samples_a != self.samples_b))

    @property
    def estimate_note(self) -> str:
        """What the ``cost luts/ffs/brams`` rows are: calibrated estimates for a named device, nothing synthesized."""
        return (f"cost {', '.join(CALIBRATED_KEYS)}: calibrated estimates for {self.cost_a.target} (no synthesis "
                "run for these plans); open-tool figures are estimates for the named device and tool version, "
                "not sign-off")  # fmt: skip

    def summary(self) -> str:
        """Deterministic text: each row as ``label: A -> B (change)``, then A against B."""
        lines = [f"A: {self.plan_a!r}", f"B: {self.plan_b!r}"]
        for label, a, b in self.rows:
            lines.append(f"  {label}: {_fmt(a)} -> {_fmt(b)} ({_change(a, b)})")
        parts = []
        if self.image_a is not None:
            parts.append(f"image {self.image_differ} of {self.image_a.size} pixels")
        if self.samples_a is not None:
            parts.append(f"samples {self.samples_differ} of {self.samples_a.size}")
        parts += [f"{n} slice {int(np.count_nonzero(a != b))} cells" for n, _, _, a, b in self.slices]
        lines.append("A and B decide differently on: " + ("; ".join(parts) if parts else "no data"))
        return "\n".join(lines)


def _fmt(v: float | None) -> str:
    if v is None:
        return "-"
    return f"{v:.3f}" if isinstance(v, float) and not float(v).is_integer() else f"{int(v)}"


def _change(a: float | None, b: float | None) -> str:
    if a is None or b is None:
        return "-"
    d = b - a
    return "same" if d == 0 else (f"{d:+.3f}" if not float(d).is_integer() else f"{int(d):+d}")


def compare_plans(session: Any, plan_a: Plan, plan_b: Plan) -> PlanComparison:
    """Both plans on the session's data (preview image, samples, slices at the current positions)."""
    net = session.network
    for name, p in (("plan_a", plan_a), ("plan_b", plan_b)):
        if not isinstance(p, Plan):
            raise TypeError(f"{name} must be a Plan, not {type(p).__name__}")
        p.check(net)
    res = session.result
    rows: list[tuple[str, float | None, float | None]] = []
    cost_a, cost_b = hardware_cost(net, plan_a), hardware_cost(net, plan_b)
    rows += [(f"cost {k}", cost_a.value(k), cost_b.value(k)) for k in COST_KEYS]
    rows.append(("cost latency", cost_a.latency, cost_b.latency))
    events = {p: dict.fromkeys(EVENT_NAMES, 0) for p in ("a", "b")}
    img_codes = img_a = img_b = sam_a = sam_b = None
    parts = []
    if res.image is not None:
        img_codes, img_labels = res.image.codes, res.image.labels
        parts.append(("image", img_codes, img_labels))
    if session.samples is not None:
        parts.append(("samples", session.samples, session.labels))
    for what, codes, labels in parts:
        got = {}
        for tag, plan in (("a", plan_a), ("b", plan_b)):
            emu = emulate(net, plan, codes).against(session.data.reference)  # float: the original
            m = error_metrics(emu, labels)
            for k, v in m.events.items():  # clipped weights and biases belong to the plan: count them once
                events[tag][k] = int(v) if k in ("weight_clip", "bias_clip") else events[tag][k] + int(v)
            got[tag] = (emu.decisions, m)
        rows.append((f"{what}: decisions differing from float", got["a"][1].mismatch, got["b"][1].mismatch))
        if got["a"][1].accuracy is not None:
            rows.append((f"{what}: accuracy (%)", 100 * got["a"][1].accuracy, 100 * got["b"][1].accuracy))
        if what == "image":
            img_a, img_b = got["a"][0], got["b"][0]
        else:
            sam_a, sam_b = got["a"][0], got["b"][0]
    rows += [(f"events {k}", events["a"][k], events["b"][k]) for k in EVENT_NAMES]
    slices = []
    if getattr(session, "cube_ok", False):
        c = np.asarray(session.slice_codes)
        n = c.size
        stack = np.empty((3 * n, n, 3), dtype=np.uint8 if net.input_bits <= 8 else np.uint16)
        pos = session.slice_positions
        for si, (_, xi, yi, fi) in enumerate(SLICE_AXES):
            block = stack[si * n : (si + 1) * n]
            block[..., xi] = c[None, :]
            block[..., yi] = c[:, None]
            block[..., fi] = pos[fi]
        da, db = emulate(net, plan_a, stack).decisions, emulate(net, plan_b, stack).decisions
        for si, (name, _, _, fi) in enumerate(SLICE_AXES):
            slices.append((name, int(pos[fi]), c, da[si * n : (si + 1) * n], db[si * n : (si + 1) * n]))
    return PlanComparison(plan_a, plan_b, tuple(net.classes), cost_a, cost_b, img_codes, img_a, img_b, sam_a, sam_b,
                          tuple(slices), tuple(rows))  # fmt: skip


def _rows_html(cmp: PlanComparison) -> str:
    out = []
    for label, a, b in cmp.rows:
        style = ""
        if a is not None and b is not None and a != b:
            better = (b > a) if any(k in label for k in _HIGHER_BETTER) else (b < a)
            style = f"font-weight:bold;color:{'#2d6a2d' if better else '#b00020'}"
        pad = "padding:0 8px;text-align:right"
        out.append(f"<tr><td style='padding-right:8px'>{html.escape(label)}</td><td style='{pad}'>{_fmt(a)}</td>"
                   f"<td style='{pad}'>{_fmt(b)}</td><td style='{pad};{style}'>{_change(a, b)}</td></tr>")  # fmt: skip
    return ("<table class='fxnet-compare-table' style='font-size:11px;border-collapse:collapse'><thead><tr><th></th>"
            "<th>A</th><th>B</th><th>change</th></tr></thead><tbody>" + "".join(out) + "</tbody></table>"
            f"<div class='fxnet-compare-note' style='font-size:11px;color:#555'>{html.escape(cmp.estimate_note)}</div>")


class ComparePanel(w.VBox):
    """Plan A (pinned) against plan B: a table of cost and events in two columns, and pictures of A against B.

    Parameters
    ----------
    explorer
        An :class:`~fxnet_widgets.widgets.explorer.Explorer` (or its session).
    plan_a
        Plan A (default: the current plan; the "pin" button pins the current plan again).
    plan_b
        Plan B; None (default): B is the explorer's current plan and follows the sliders.
    """

    def __init__(self, explorer: Any, plan_a: Plan | None = None, plan_b: Plan | None = None) -> None:
        self.session = getattr(explorer, "session", explorer)
        if self.session is not explorer:
            explorer.pinned_comparison = self  # the report's comparison section reads it (report/_search.py)
        self.plan_a: Plan = self.session.plan if plan_a is None else plan_a
        self.plan_b: Plan | None = plan_b
        self.pin_button = w.Button(description="pin current plan as A")
        self.pin_button.on_click(lambda _b: self.pin())
        self.head = w.HTML()
        self.table = w.HTML()
        self.image = w.Image(format="png")
        self.slice_images = [w.Image(format="png", layout=w.Layout(width="160px")) for _ in SLICE_AXES]
        self.slice_labels = [w.HTML() for _ in SLICE_AXES]
        self.legend = w.HTML()
        pictures: list[w.Widget] = []
        if self.session.result.image is not None:
            pictures.append(w.VBox([w.HTML("<b>image: A against B</b>"), self.image]))
        if getattr(self.session, "cube_ok", False):
            pictures += [w.VBox([lab, im]) for lab, im in zip(self.slice_labels, self.slice_images)]
        super().__init__([w.HBox([self.pin_button, self.head]), self.table,
                          w.HBox(pictures, layout=w.Layout(flex_flow="row wrap")), self.legend])  # fmt: skip
        self.add_class("fxnet-compare")
        self.session.observe(lambda _c: self._update(), names="version")
        self._update()

    def pin(self, plan: Plan | None = None) -> None:
        """Pin ``plan`` (default: the explorer's current plan) as A."""
        self.plan_a = self.session.plan if plan is None else plan.check(self.session.network)
        self._update()

    def set_b(self, plan: Plan | None) -> None:
        """Compare against ``plan`` (None: B follows the explorer's current plan)."""
        self.plan_b = None if plan is None else plan.check(self.session.network)
        self._update()

    @property
    def text(self) -> str:
        """:meth:`PlanComparison.summary` of what the panel shows."""
        return self.comparison.summary()

    def _update(self) -> None:
        s = self.session
        b = s.result.plan if self.plan_b is None else self.plan_b
        self.comparison = cmp = compare_plans(s, self.plan_a, b)
        follow = " (B follows the explorer's current plan)" if self.plan_b is None else ""
        self.head.value = f"<span style='font-size:11px'>A: {html.escape(repr(cmp.plan_a))}<br>B: " \
                          f"{html.escape(repr(cmp.plan_b))}{html.escape(follow)}</span>"  # fmt: skip
        self.table.value = _rows_html(cmp)
        n = len(cmp.classes)
        if cmp.image_a is not None and cmp.image_codes is not None:
            codes = cmp.image_codes if cmp.image_codes.dtype == np.uint8 else cmp.image_codes.astype(np.uint8)
            self.image.value = overlay_png(codes, cmp.image_b, cmp.image_a, n)
        pal = slice_palette(n)
        for (name, pos, _c, a, bb), im, lab in zip(cmp.slices, self.slice_images, self.slice_labels):
            im.value = palette_png(np.flipud(comparison_codes(bb, a, n)), pal)
            fixed = "RGB"[next(fi for nm, _, _, fi in SLICE_AXES if nm == name)]
            lab.value = f"<b>{name}</b> at {fixed} {pos}: {int(np.count_nonzero(a != bb))} cells differ"
        if n == 2:
            target = html.escape(cmp.classes[1])
            self.legend.value = (f"<span style='font-size:11px'>magenta: only B says {target}; teal: only A says "
                                 f"{target}; slices: amber both {target}, slate both {html.escape(cmp.classes[0])}"
                                 "</span>")  # fmt: skip
        else:
            self.legend.value = "<span style='font-size:11px'>magenta: A and B decide differently</span>"
