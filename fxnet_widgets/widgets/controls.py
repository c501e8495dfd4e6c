"""Plan controls: sliders, number boxes, mode choices and the "safe" button.

The controls hold UI state only. A person moving one on the page sends the
session one field for the chosen layer(s) (:meth:`Session.page_change`), stamped
with the plan version the control showed; the session sets that field on its
current plan, or drops the change when it was made on an older plan. When the
plan changes by any other route (a notebook cell, another panel,
``session.set_state``), the controls show it, so controls and plan agree.

How changes from Python and from the page are merged:

* the kernel writes every control's value; the page never sends a written
  value back (the controls are standard widgets with no browser-side links,
  so nothing in the page copies a value into another control);
* a page message is a person's change only if it differs from what the kernel
  shows; a value equal to one the kernel wrote and then replaced shortly
  before (within :data:`ECHO_SECONDS` of the replacement, or of the end of the
  computation that followed it) is a late echo of that older state, stamped
  with its version, and the session drops it;
* with "all layers" chosen and layers that differ, a control shows the mix
  ("18-19" in its number box, "mixed" beside it) and sends nothing until a
  person moves it; moving it sets that value on every layer that has the field;
* a field only some of the chosen layers have (table fields: sigmoid/tanh;
  output fraction: relu/identity) applies to those and says which; a field
  none of them has is hidden.
"""

from __future__ import annotations

import time
from typing import Any

import ipywidgets as w

from ..core.network_doc import TABLE_ACTIVATIONS
from ..core.plan import CHOICES, INT_LIMITS, Plan
from .page import PageDropdown, PageIntSlider, PageText, from_page
from .session import Session, SessionResult

__all__ = ["PlanControlsPanel", "SLIDER_FIELDS", "CHOICE_FIELDS", "ECHO_SECONDS", "field_applies"]

#: plan field -> (plain description, slider min, slider max)
SLIDER_FIELDS: dict[str, tuple[str, int, int]] = {
    "weight_bits": ("weight width", 2, 24),
    "weight_frac": ("weight fraction bits", -8, 24),
    "acc_bits": ("accumulator width", 2, 40),
    "table_bits": ("table width (address bits)", 2, 16),
    "table_frac": ("table input fraction bits", -8, 20),
    "out_bits": ("output width", 1, 16),
    "out_frac": ("output fraction bits", -8, 16),
}
#: plan field -> plain description
CHOICE_FIELDS: dict[str, str] = {
    "weight_round": "weight rounding",
    "acc_overflow": "accumulator overflow",
    "index_round": "table index rounding",
    "table_round": "table entry rounding",
}
_TABLE_ONLY = ("table_bits", "table_frac", "index_round", "table_round")
_NO_TABLE_ONLY = ("out_frac",)
#: a page value equal to one the kernel wrote and replaced less than this long ago is a late echo
ECHO_SECONDS = 2.0
_STYLE = {"description_width": "200px"}


def field_applies(activation: str, field: str) -> bool:
    """Whether a layer with ``activation`` has the plan field (tables: sigmoid/tanh; out_frac: relu/identity)."""
    table = activation in TABLE_ACTIVATIONS
    return not ((field in _TABLE_ONLY and not table) or (field in _NO_TABLE_ONLY and table))


class _Shown:
    """What one control shows, and the values the kernel sent it and then replaced (late-echo check).

    Only values the kernel sent count: a value the page sent itself is never echoed back late, and
    once a person's change is applied every message the page sent before it is in (the page's
    messages arrive in order), so the panel clears every control's history.
    """

    def __init__(self) -> None:
        self.value: Any = None
        self.version = 0
        self.from_kernel = False
        self.replaced: list[tuple[Any, int, float]] = []  # (value, plan version, when replaced)

    def write(self, value: Any, version: int) -> None:
        """The kernel shows ``value`` for plan ``version`` (sent to the page unless the page shows it already)."""
        if value != self.value:
            if self.from_kernel and self.value is not None:
                self.replaced.append((self.value, self.version, time.monotonic()))
                del self.replaced[:-8]
            self.value, self.from_kernel = value, True
        self.version = version

    def page_applied(self, value: Any) -> None:
        """A person's ``value`` from the page was applied: the page shows it."""
        self.value, self.from_kernel = value, False
        self.replaced.clear()

    def stamp(self, value: Any, idle_since: float, horizon: float = ECHO_SECONDS) -> int | None:
        """The version a page value was made on: None for an echo of the current value, an older
        version for a late echo of a replaced value, else the current version (a person's new value).

        A replaced value counts as late for ``horizon`` seconds after it was replaced or, when
        the kernel was computing then, after the computation ended (``idle_since``).
        """
        if value == self.value:
            return None
        now = time.monotonic()
        for old, version, when in reversed(self.replaced):
            if old == value and now - max(when, idle_since) < horizon:
                return version
        return self.version


class PlanControlsPanel(w.VBox):
    """Sliders and choices for the session's plan.

    With "all layers" chosen a control shows the value every chosen layer that
    has the field shares, or the mix; a change sets it on each of them. With one
    layer chosen it shows and sets that layer only.

    Attributes
    ----------
    layer : ipywidgets.Dropdown
        ``-1`` (all layers) or a layer index.
    sliders, boxes : dict
        Per plan field, the ``IntSlider`` and its number box (a ``Text``: it can show a mix, "18-19").
    notes : dict
        Per plan field, the note beside it: "mixed: ..." and which layers it applies to.
    choices : dict
        Per mode field, the ``Dropdown`` (no value while the chosen layers differ).
    safe_label, safe_button
        The guaranteed-safe accumulator width of the chosen layer(s) and the button that sets it.
    """

    def __init__(self, session: Session, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        self.session = session
        net = session.network
        #: how long a replaced value counts as a late echo (:data:`ECHO_SECONDS`; 0: never)
        self.echo_seconds = ECHO_SECONDS
        self._syncing = False
        self._shown: dict[str, _Shown] = {}
        options: list[tuple[str, int]] = [("all layers", -1)]
        for i, L in enumerate(net.layers):
            options.append((f"layer {i + 1} ({L.activation}, {L.n_in}->{L.n_out})", i))
        self.layer = PageDropdown(options=options, value=-1, description="layer", style=_STYLE)
        self.sliders: dict[str, w.IntSlider] = {}
        self.boxes: dict[str, w.Text] = {}
        self.notes: dict[str, w.HTML] = {}
        self.rows: dict[str, w.HBox] = {}
        rows: list[w.Widget] = [self.layer]
        for name, (desc, lo, hi) in SLIDER_FIELDS.items():
            s = PageIntSlider(
                value=lo, min=lo, max=hi, description=desc, continuous_update=True, readout=False,
                style=_STYLE, layout=w.Layout(width="420px"),
            )  # fmt: skip
            box = PageText(value=str(lo), continuous_update=False, layout=w.Layout(width="70px"))
            box.add_class("fxnet-number")
            s.observe(self._slider_moved, names="value")
            box.observe(self._box_typed, names="value")
            self.sliders[name], self.boxes[name] = s, box
            self._shown[f"slider {name}"], self._shown[f"box {name}"] = _Shown(), _Shown()
            self.notes[name] = w.HTML(layout=w.Layout(width="230px", overflow="hidden"))
            row: list[w.Widget] = [s, box]
            if name == "acc_bits":
                self.safe_label = w.HTML(layout=w.Layout(width="230px", overflow="hidden"))
                self.safe_button = w.Button(
                    description="safe", tooltip="set the guaranteed-safe accumulator width (no overflow for any input)",
                    layout=w.Layout(width="60px"),
                )  # fmt: skip
                self.safe_button.on_click(lambda _b: self.set_safe())
                row += [self.safe_button, self.safe_label]
            row.append(self.notes[name])
            self.rows[name] = w.HBox(row)
            rows.append(self.rows[name])
        self.choices: dict[str, w.Dropdown] = {}
        for name, desc in CHOICE_FIELDS.items():
            d = PageDropdown(options=list(CHOICES[name]), description=desc, style={"description_width": "150px"},
                             layout=w.Layout(width="290px"))  # fmt: skip
            d.observe(self._choice_changed, names="value")
            self.choices[name] = d
            self._shown[f"choice {name}"] = _Shown()
        self.choice_note = w.HTML()
        rows.append(w.HBox([self.choices["weight_round"], self.choices["acc_overflow"]]))
        rows.append(w.HBox([self.choices["index_round"], self.choices["table_round"]]))
        rows.append(self.choice_note)
        self.layer.observe(self._layer_chosen, names="value")
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

    def field_targets(self, field: str) -> list[int]:
        """The chosen layers that have ``field`` (a change of that control sets it on these)."""
        layers = self.session.network.layers
        return [li for li in self.targets() if field_applies(layers[li].activation, field)]

    def _layer_chosen(self, change: Any) -> None:
        self._pull()
        if from_page(self.layer):  # a person's choice: every message the page sent before it is in
            for shown in self._shown.values():
                shown.replaced.clear()

    # -- controls -> plan --------------------------------------------------------------
    def set_field(self, field: str, value: Any) -> None:
        """Set one plan field on the chosen layer(s) that have it (one new plan, one update)."""
        plan = self.session.plan
        for li in self.field_targets(field):
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

    def _from_page(self, key: str, field: str, value: Any, sent: Any = None) -> None:
        """A page message (``sent``: as the page sent it, default ``value``): ignore an echo, let the
        session drop a late one, else apply it on the current plan."""
        shown = self._shown[key]
        page_value = value if sent is None else sent
        version = shown.stamp(page_value, self.session.idle_since, self.echo_seconds)
        if version is None:
            return
        if self.session.page_change({field: value}, self.field_targets(field), version):
            # the page's messages arrive in order: every late echo it sent before this change is in
            for other in self._shown.values():
                other.replaced.clear()
            shown.page_applied(page_value)
        else:
            self._pull()  # dropped: show the kernel's plan again (the page follows)

    def _slider_moved(self, change: Any) -> None:
        if self._syncing:
            return
        name = next(k for k, s in self.sliders.items() if s is change["owner"])
        v = int(change["new"])
        if from_page(change["owner"]):
            self._from_page(f"slider {name}", name, v)
        else:  # set from code: as a person would, on the chosen layers
            self.set_field(name, v)

    def _box_typed(self, change: Any) -> None:
        if self._syncing:
            return
        name = next(k for k, b in self.boxes.items() if b is change["owner"])
        text = str(change["new"]).strip()
        lo, hi = INT_LIMITS[name]
        try:
            v = int(text)
        except ValueError:
            v = None
        if v is None or not lo <= v <= hi:  # not a width the plan allows: snap back, say why
            if from_page(change["owner"]) and self._shown[f"box {name}"].stamp(text, 0.0) is None:
                return  # the page echoing a mix the kernel showed ("18-19")
            self.session.error = f"{SLIDER_FIELDS[name][0]} must be an integer between {lo} and {hi}, not {text!r}"
            self._pull()
            return
        if from_page(change["owner"]):
            self._from_page(f"box {name}", name, v, sent=str(change["new"]))
        else:
            self.set_field(name, v)

    def _choice_changed(self, change: Any) -> None:
        if self._syncing or change["new"] is None:
            return
        name = next(k for k, d in self.choices.items() if d is change["owner"])
        if from_page(change["owner"]):
            self._from_page(f"choice {name}", name, change["new"])
        else:
            self.set_field(name, change["new"])

    # -- plan -> controls --------------------------------------------------------------
    def _write(self, name: str, values: list[int], version: int) -> None:
        """Show the chosen layers' ``values`` of one field on its slider and number box (one sync each)."""
        s, box = self.sliders[name], self.boxes[name]
        lo_v, hi_v = min(values), max(values)
        text = str(lo_v) if lo_v == hi_v else f"{lo_v}-{hi_v}"
        with s.hold_sync(), box.hold_sync():
            s.min, s.max = min(s.min, lo_v), max(s.max, hi_v)
            s.value = lo_v
            box.value = text
        self._shown[f"slider {name}"].write(lo_v, version)
        self._shown[f"box {name}"].write(text, version)
        if lo_v == hi_v:
            s.remove_class("fxnet-mixed")
        else:
            s.add_class("fxnet-mixed")

    def _pull(self) -> None:
        """Show the session plan's values for the chosen layer(s)."""
        plan: Plan = self.session.plan
        version = self.session.plan_version
        chosen = self.targets()
        self._syncing = True
        try:
            for name in self.sliders:
                have = self.field_targets(name)
                self.rows[name].layout.display = "" if have else "none"
                if not have:
                    continue
                last = self.session.last_result
                if name == "acc_bits" and last is not None:
                    s = self.sliders[name]
                    s.max = max(s.max, min(max(last.layer_safe_acc_bits) + 8, INT_LIMITS["acc_bits"][1]))
                values = [int(getattr(plan.layers[li], name)) for li in have]
                self._write(name, values, version)
                self.notes[name].value = self._note(have, chosen, values)
            said = []
            for name, d in self.choices.items():
                have = self.field_targets(name)
                d.layout.display = "" if have else "none"
                if not have:
                    continue
                values = [getattr(plan.layers[li], name) for li in have]
                shown = values[0] if len(set(values)) == 1 else None
                d.value = shown
                self._shown[f"choice {name}"].write(shown, version)
                if shown is None or len(have) < len(chosen):
                    said.append(f"{CHOICE_FIELDS[name]}: {self._note(have, chosen, values, html=False)}")
            self.choice_note.value = (f"<span style='font-size:12px'>{'; '.join(said)}</span>" if said else "")
        finally:
            self._syncing = False
        self._show_safe()

    @staticmethod
    def _note(have: list[int], chosen: list[int], values: list[Any], html: bool = True) -> str:
        """'mixed: L1 18, L2 19' and/or 'only L1, L3' (the layers that have the field), or ''."""
        parts = []
        if len(set(values)) > 1:
            parts.append("mixed: " + ", ".join(f"L{li + 1} {v}" for li, v in zip(have, values)))
        if len(have) < len(chosen):
            parts.append("only " + ", ".join(f"L{li + 1}" for li in have))
        text = "; ".join(parts)
        if not html or not text:
            return text
        return f"<span style='font-size:12px;color:#8a5a00;white-space:nowrap' title='{text}'>{text}</span>"

    def _show_safe(self) -> None:
        """The safe widths the last result carries (the label follows each new result)."""
        result = self.session.last_result
        if result is None:
            return
        parts = []
        for li in self.targets():
            safe = result.layer_safe_acc_bits[li]
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
        """What the controls show now: ``{field: value}`` (None for a mixed choice) plus ``layer``."""
        out: dict[str, Any] = {name: s.value for name, s in self.sliders.items()}
        out.update({name: d.value for name, d in self.choices.items()})
        out["layer"] = self.layer.value
        return out
