"""Plan controls: sliders, number boxes, mode choices and the "safe" button.

The controls hold UI state only. Moving one builds a new plan from the
session's current plan (one field, on the chosen layer or on all layers) and
assigns it to ``session.plan``; the session computes. When the plan changes by
any other route (another controls panel, ``session.set_state``, code), the
controls follow it, so controls and plan always agree.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import Any

import ipywidgets as w

from ..core.plan import CHOICES, INT_LIMITS, LayerPlan, Plan
from .session import Session, SessionResult

__all__ = ["PlanControlsPanel", "SLIDER_FIELDS", "CHOICE_FIELDS"]

#: plan field -> (plain description, slider min, slider max)
SLIDER_FIELDS: dict[str, tuple[str, int, int]] = {
    "weight_bits": ("weight width", 2, 24),
    "weight_frac": ("weight fraction bits", -8, 24),
    "acc_bits": ("accumulator width", 2, 40),
    "table_bits": ("table width (address bits)", 2, 16),
    "table_frac": ("table input fraction bits", -8, 20),
    "out_bits": ("table output bits", 1, 16),
}
#: plan field -> plain description
CHOICE_FIELDS: dict[str, str] = {
    "weight_round": "weight rounding",
    "acc_overflow": "accumulator overflow",
    "index_round": "table index rounding",
    "table_round": "table entry rounding",
}
_TABLE_FIELDS = ("table_bits", "table_frac")
_STYLE = {"description_width": "200px"}


class PlanControlsPanel(w.VBox):
    """Sliders and choices for the session's plan.

    With "all layers" chosen the controls show layer 1's values (for the table
    fields: the first layer with a table) and a change sets that one field on
    every layer (table fields only on sigmoid/tanh layers); with one layer
    chosen they show and set that layer only.

    Parameters
    ----------
    session
        The shared :class:`~fxnet_widgets.widgets.session.Session`.

    Attributes
    ----------
    layer : ipywidgets.Dropdown
        ``-1`` (all layers) or a layer index.
    sliders, boxes : dict
        Per plan field, the ``IntSlider`` and the ``IntText`` linked to it (``jslink``).
    choices : dict
        Per mode field, the ``Dropdown``.
    safe_label, safe_button
        The guaranteed-safe accumulator width of the chosen layer(s) and the
        button that sets it.
    """

    def __init__(self, session: Session, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        self.session = session
        net = session.network
        self._syncing = False
        self._front = 0  # > 0 while a change from the browser is applied
        options: list[tuple[str, int]] = [("all layers", -1)]
        for i, L in enumerate(net.layers):
            options.append((f"layer {i + 1} ({L.activation}, {L.n_in}->{L.n_out})", i))
        self.layer = w.Dropdown(options=options, value=-1, description="layer", style=_STYLE)
        self.sliders: dict[str, w.IntSlider] = {}
        self.boxes: dict[str, w.IntText] = {}
        self.links: list[Any] = []
        rows: list[w.Widget] = [self.layer]
        for name, (desc, lo, hi) in SLIDER_FIELDS.items():
            s = w.IntSlider(
                value=lo, min=lo, max=hi, description=desc, continuous_update=True, readout=False,
                style=_STYLE, layout=w.Layout(width="420px"),
            )  # fmt: skip
            box = w.IntText(value=lo, layout=w.Layout(width="70px"))
            self.links.append(w.jslink((s, "value"), (box, "value")))
            s.observe(self._slider_moved, names="value")
            # without a browser the number box still drives the slider (Python side)
            box.observe(self._box_typed, names="value")
            self.sliders[name], self.boxes[name] = s, box
            row: list[w.Widget] = [s, box]
            if name == "acc_bits":
                self.safe_label = w.HTML(layout=w.Layout(width="230px", overflow="hidden"))
                self.safe_button = w.Button(
                    description="safe", tooltip="set the guaranteed-safe accumulator width (no overflow for any input)",
                    layout=w.Layout(width="60px"),
                )  # fmt: skip
                self.safe_button.on_click(lambda _b: self.set_safe())
                row += [self.safe_button, self.safe_label]
            rows.append(w.HBox(row))
        self.choices: dict[str, w.Dropdown] = {}
        choice_rows = []
        for name, desc in CHOICE_FIELDS.items():
            d = w.Dropdown(options=list(CHOICES[name]), description=desc, style={"description_width": "150px"},
                           layout=w.Layout(width="290px"))  # fmt: skip
            d.observe(self._choice_changed, names="value")
            self.choices[name] = d
            choice_rows.append(d)
        rows.append(w.HBox(choice_rows[:2]))
        rows.append(w.HBox(choice_rows[2:]))
        self.layer.observe(lambda _c: self._pull(), names="value")
        super().__init__(rows, **kwargs)
        self.add_class("fxnet-plan-controls")
        self._pull()
        session.observe(lambda _c: self._pull(), names="plan")
        session.add_view("controls", self._show_result)

    # -- which layers a change applies to -------------------------------------------
    def targets(self) -> list[int]:
        """Layer indices the controls act on (all, or the chosen one)."""
        n = len(self.session.network.layers)
        return list(range(n)) if self.layer.value == -1 else [int(self.layer.value)]

    def _shown_layer(self, field: str) -> int:
        net = self.session.network
        idx = self.targets()
        if field in _TABLE_FIELDS:
            with_table = [i for i in idx if net.layers[i].has_table]
            return with_table[0] if with_table else idx[0]
        return idx[0]

    def _has(self, li: int, field: str) -> bool:
        return field not in _TABLE_FIELDS or self.session.network.layers[li].has_table

    # -- controls -> plan --------------------------------------------------------------
    def set_field(self, field: str, value: Any) -> None:
        """Set one plan field on the chosen layer(s) (one new plan, one update)."""
        plan = self.session.plan
        for li in self.targets():
            if self._has(li, field):
                plan = plan.replace(layer=li, **{field: value})
        if plan != self.session.plan:
            self.session.plan = plan

    def set_safe(self) -> None:
        """Set every chosen layer's accumulator to its guaranteed-safe width."""
        safe = self.session.result.layer_safe_acc_bits
        plan = self.session.plan
        for li in self.targets():
            plan = plan.replace(layer=li, acc_bits=int(min(max(safe[li], 1), INT_LIMITS["acc_bits"][1])))
        if plan != self.session.plan:
            self.session.plan = plan

    @staticmethod
    def _is_from_browser(change: Any) -> bool:
        """Whether a change came from the front end (ipywidgets applies those under a property lock;
        a dropdown's front end sends ``index``, a slider's ``value``)."""
        return bool(change["owner"]._property_lock)

    def _from_browser(self, change: Any) -> Any:
        """Defer the session's work for a change that came from the front end (coalescing)."""
        return self.session.deferred() if self._is_from_browser(change) else contextlib.nullcontext()

    @contextlib.contextmanager
    def _browser_change(self) -> Iterator[None]:
        """While a front-end change is applied, the controls write no control value back.

        The browser already shows the value (and the ``jslink`` moved the partner
        widget there); a value written from Python now could reach the browser
        after a newer one and the link would copy it back onto the slider.
        """
        self._front += 1
        try:
            yield
        finally:
            self._front -= 1

    def _slider_moved(self, change: Any) -> None:
        if self._syncing:
            return
        name = next(k for k, s in self.sliders.items() if s is change["owner"])
        if self._is_from_browser(change):
            # the jslink moved the number box in the browser: never write it from here
            with self._browser_change(), self._from_browser(change):
                self.set_field(name, int(change["new"]))
            return
        # set from code: keep the box with it (both in one sync), then the plan
        self._write(name, int(change["new"]))
        self.set_field(name, int(change["new"]))

    def _box_typed(self, change: Any) -> None:
        if self._syncing:
            return
        if self._is_from_browser(change):
            # the jslink moves the slider in the browser, and the slider's own update drives the plan
            return
        name = next(k for k, b in self.boxes.items() if b is change["owner"])
        lo, hi = INT_LIMITS[name]
        v = int(change["new"])
        if not lo <= v <= hi:  # out of the plan's limits: snap back, say why
            self.session.error = f"{SLIDER_FIELDS[name][0]} must be between {lo} and {hi}, not {v}"
            self._pull()
            return
        self._write(name, v)
        self.set_field(name, v)

    def _choice_changed(self, change: Any) -> None:
        if self._syncing:
            return
        name = next(k for k, d in self.choices.items() if d is change["owner"])
        if self._is_from_browser(change):
            with self._browser_change(), self._from_browser(change):
                self.set_field(name, change["new"])
            return
        self.set_field(name, change["new"])

    # -- plan -> controls --------------------------------------------------------------
    def _write(self, name: str, v: int) -> None:
        """Show ``v`` on the slider and its number box together (one sync each, same value)."""
        s, box = self.sliders[name], self.boxes[name]
        was, self._syncing = self._syncing, True
        try:
            with s.hold_sync(), box.hold_sync():
                s.min, s.max = min(s.min, v), max(s.max, v)
                s.value = v
                box.value = v
        finally:
            self._syncing = was

    def _pull(self) -> None:
        """Show the session plan's values for the chosen layer(s).

        Skipped while a change from the browser is applied: the browser shows it already.
        """
        if self._front:
            self._show_safe()
            return
        plan: Plan = self.session.plan
        self._syncing = True
        try:
            for name, s in self.sliders.items():
                li = self._shown_layer(name)
                lp: LayerPlan = plan.layers[li]
                v = getattr(lp, name)
                usable = any(self._has(i, name) for i in self.targets())
                s.disabled = self.boxes[name].disabled = not usable
                if v is None:
                    continue
                if name == "acc_bits":
                    safe = int(max(L.safe_acc_bits.max() for L in self._intlayers()))
                    s.max = max(s.max, min(safe + 8, INT_LIMITS["acc_bits"][1]))
                self._write(name, v)
            for name, d in self.choices.items():
                d.value = getattr(plan.layers[self._shown_layer(name)], name)
        finally:
            self._syncing = False
        self._show_safe()

    def _intlayers(self) -> list[Any]:
        from ..core.kernel import build_integer_network

        try:
            return list(build_integer_network(self.session.network, self.session.plan).layers)
        except (TypeError, ValueError):
            return list(build_integer_network(self.session.network, self.session.result.plan).layers)

    def _show_safe(self) -> None:
        try:
            layers = self._intlayers()
        except Exception:  # no result yet
            return
        parts = []
        for li in self.targets():
            safe = int(layers[li].safe_acc_bits.max())
            have = self.session.plan.layers[li].acc_bits
            mark = "ok" if have >= safe else "can overflow"
            colour = "#2d6a2d" if have >= safe else "#b00020"
            parts.append(f"L{li + 1} {safe} b <span style='color:{colour}'>{mark}</span>")
        tip = "guaranteed-safe accumulator width per layer: at this width or wider no input overflows"
        # one line of fixed width (never wraps), so every slider row has the same height
        self.safe_label.value = (
            f"<div title='{tip}' style='white-space:nowrap;overflow:hidden;text-overflow:ellipsis;font-size:12px'>"
            "safe: " + ", ".join(parts) + "</div>"
        )

    def _show_result(self, result: SessionResult) -> None:
        self._show_safe()

    def values(self) -> dict[str, Any]:
        """What the controls show now: ``{field: value}`` plus ``layer``."""
        out: dict[str, Any] = {name: s.value for name, s in self.sliders.items()}
        out.update({name: d.value for name, d in self.choices.items()})
        out["layer"] = self.layer.value
        return out
