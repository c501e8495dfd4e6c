"""Which changes come from the page: one helper on a documented ipywidgets method.

ipywidgets applies every state message from the front end through
:meth:`ipywidgets.Widget.set_state` (documented as "called when a state is
received from the front-end"). :class:`FromPage` wraps it, so an observer can
ask :func:`from_page` whether the change it sees is being applied from the
page. No private attribute of ipywidgets is read.

The controls use the standard front-end models (sliders, text boxes,
dropdowns) and no browser-side links between them: a value the kernel writes
is shown by the page and never sent back, so every state message from the
page is a person's action (or, with several pages on one kernel, another
page's). See :mod:`fxnet_widgets.widgets.controls` for how such a change is
stamped with the plan version it was made on.
"""

from __future__ import annotations

from typing import Any

import ipywidgets as w

__all__ = ["FromPage", "from_page", "PageIntSlider", "PageText", "PageDropdown", "PageToggleButton"]


class FromPage:
    """Mixin for an ipywidgets widget: counts the page's state messages being applied."""

    _page_depth = 0

    def set_state(self, sync_data: Any) -> None:
        """Apply state received from the page (ipywidgets' documented entry point), marked as such."""
        self._page_depth += 1
        try:
            super().set_state(sync_data)  # type: ignore[misc]
        finally:
            self._page_depth -= 1


def from_page(widget: Any) -> bool:
    """Whether ``widget`` is now applying a state message from the page (False for any change made in Python)."""
    return isinstance(widget, FromPage) and widget._page_depth > 0


class PageIntSlider(FromPage, w.IntSlider):
    """An ``IntSlider`` that knows when a change comes from the page."""


class PageText(FromPage, w.Text):
    """A ``Text`` box that knows when a change comes from the page."""


class PageDropdown(FromPage, w.Dropdown):
    """A ``Dropdown`` that knows when a change comes from the page."""


class PageToggleButton(FromPage, w.ToggleButton):
    """A ``ToggleButton`` that knows when a change comes from the page."""
