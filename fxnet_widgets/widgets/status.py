"""The status line (what was computed, or what went wrong) and a sweep progress bar."""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as w

from ..core.plan import Plan
from .results import SessionResult
from .session import Session

__all__ = ["StatusLinePanel", "SweepProgressBar", "plan_widths", "status_text", "WIDTHS_KEY"]

#: what the short width words of :func:`plan_widths` mean (the status line's tooltip)
WIDTHS_KEY = (
    "per layer: W weight width.fraction bits, A accumulator width, T table address bits.table input fraction bits "
    "(sigmoid/tanh), O output width (.fraction bits for relu/identity)"
)


def plan_widths(plan: Plan) -> str:
    """The plan's widths in short words, one group per layer (see :data:`WIDTHS_KEY`).

    >>> from fxnet_widgets.core.plan import Plan
    >>> plan_widths(Plan.from_dict({"layers": [
    ...     {"weight_bits": 10, "weight_frac": 5, "acc_bits": 18, "out_bits": 8, "table_bits": 14, "table_frac": 10},
    ...     {"weight_bits": 8, "weight_frac": 6, "acc_bits": 16, "out_bits": 8, "out_frac": 4}]}))
    'L1 W10.5 A18 T14.10 O8, L2 W8.6 A16 O8.4'
    """
    groups = []
    for i, lp in enumerate(plan.layers):
        words = [f"L{i + 1}", f"W{lp.weight_bits}.{lp.weight_frac}", f"A{lp.acc_bits}"]
        if lp.table_bits is not None:
            words.append(f"T{lp.table_bits}.{lp.table_frac}")
            words.append(f"O{lp.out_bits}")
        else:
            words.append(f"O{lp.out_bits}" + (f".{lp.out_frac}" if lp.out_frac is not None else ""))
        groups.append(" ".join(words))
    return ", ".join(groups)


def status_text(r: SessionResult, update: int) -> str:
    """The line for a result that worked: the warning events and the widths.

    Table clamps are named for networks with a table layer, output clamps for
    networks with relu/identity layers; relu "off" is the activation itself and
    not named here (the events plot counts it per neuron); argmax ties are
    named for several outputs.
    """
    ev = r.shown_totals()
    words = [f"ok: update {update}", f"accumulator overflows {ev['acc_overflow']}"]
    if "table" in r.kinds:
        words.append(f"table clamps {ev['table_low'] + ev['table_high']}")
    if any(k != "table" for k in r.kinds):
        words.append(f"output clamps {ev['output_clamp']}")
    words.append(f"clipped weights {ev['weight_clip']}")
    if any(f.ties for f in r.figures):  # several outputs
        words.append(f"argmax ties {r.tie_total}")
    return ", ".join(words) + f"; widths {plan_widths(r.plan)}"


class StatusLinePanel(w.HTML):
    """One visible line: the current plan's state, a computation error, view errors.

    Errors never hide in a log: a plan the kernel refuses shows here in red (the
    other views keep the last plan that worked), and so does a failing view.
    """

    def __init__(self, session: Session, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        super().__init__(**kwargs)
        self.session = session
        self._text: str | None = None
        self.add_class("fxnet-status")
        # drawn when the update number moves (after every view has the new result), not as a view: the
        # line then never shows a new result beside the previous update's number
        session.observe(lambda _c: self._show(), names=["error", "view_errors", "version"])
        if session.last_result is not None:
            self._show()

    @property
    def text(self) -> str:
        """The line as plain text, as drawn (deterministic)."""
        if self._text is None:
            self._show()
        assert self._text is not None
        return self._text

    def _line(self) -> str:
        s = self.session
        parts = []
        if s.error:
            shown = s.last_result is not None
            parts.append(f"error: {s.error}" + (" (views show the last plan that worked)" if shown else ""))
        for msg in s.view_errors.values():
            parts.append(f"view error: {msg}")
        if not parts:
            parts.append(status_text(s.result, s.version))
        return "; ".join(parts)

    def _show(self) -> None:
        s = self.session
        bad = bool(s.error or s.view_errors)
        colour = "#b00020" if bad else "#2d6a2d"
        self._text = self._line()
        self.value = (
            f'<span style="color:{colour};font-family:monospace" title="{html.escape(WIDTHS_KEY)}">'
            f"{html.escape(self._text)}</span>"
        )


class SweepProgressBar(w.HBox):
    """A progress bar for long runs (sweeps, searches): call it as ``bar(done, total)``.

    >>> bar = SweepProgressBar("sweep")
    >>> bar(3, 12); bar.bar.value, bar.label.value
    (3, '3 of 12')
    """

    def __init__(self, description: str = "progress", **kwargs: Any) -> None:
        self.bar = w.IntProgress(value=0, min=0, max=1, description=description)
        self.label = w.Label("")
        super().__init__([self.bar, self.label], **kwargs)

    def __call__(self, done: int, total: int, message: str = "") -> None:
        if total < 1 or not 0 <= done <= total:
            raise ValueError(f"done must be between 0 and total >= 1, not {done!r} of {total!r}")
        self.bar.max = total
        self.bar.value = done
        self.bar.bar_style = "success" if done == total else ""
        self.label.value = f"{done} of {total}" + (f": {message}" if message else "")
