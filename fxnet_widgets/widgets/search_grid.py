"""The search panel's grid: the editor (fields, values, layer) and the cutting of a grid into chunks.

A grid is ``{plan field: values}``; its plans are the cartesian product, first
field slowest (as :func:`~fxnet_widgets.core.analysis.search.sweep` takes them).
:func:`sub_grids` cuts the product into consecutive pieces that are themselves
products, so each piece is one ordinary ``sweep`` call and the pieces' records,
re-indexed, are exactly the records of one sweep over the whole grid.

>>> list(sub_grids({"a": [1, 2], "b": [3, 4, 5]}, 2))[:2]
[(0, {'a': [1], 'b': [3, 4]}), (2, {'a': [1], 'b': [5]})]
"""

from __future__ import annotations

import html
import math
from collections.abc import Iterator, Mapping, Sequence
from typing import Any

import ipywidgets as w

from ..core.analysis import parse_grid
from ..core.network import Network
from ..core.plan import CHOICES, INT_LIMITS, PLAN_FIELDS, Plan

__all__ = ["GridEditor", "default_grid", "grid_size", "parse_values", "sub_grid", "sub_grids"]


def grid_size(grid: Mapping[str, Sequence[Any]]) -> int:
    """Number of plans of a grid (the product of its value counts)."""
    return math.prod(len(v) for v in grid.values())


def sub_grid(grid: Mapping[str, Sequence[Any]], start: int, target: int) -> dict[str, list[Any]]:
    """The product piece of ``grid`` starting at plan ``start``, of at most ``max(1, target)`` plans.

    The piece fixes the leading fields, takes a run of values of one field and
    every value of the fields after it (the largest such piece that fits).
    """
    names = list(grid)
    sizes = [len(grid[k]) for k in names]
    if not 0 <= start < math.prod(sizes):
        raise ValueError(f"start must be a plan index below {math.prod(sizes)}, not {start!r}")
    digits, rest = [], start
    for s in reversed(sizes):
        digits.append(rest % s)
        rest //= s
    digits.reverse()
    k = len(names)
    d = k - 1
    for cand in range(k):  # the first field whose tail is whole and fits the target
        if all(x == 0 for x in digits[cand + 1 :]) and math.prod(sizes[cand + 1 :]) <= max(1, target):
            d = cand
            break
    inner = math.prod(sizes[d + 1 :])
    n = max(1, min(max(1, target) // inner, sizes[d] - digits[d]))
    sub = {names[j]: [grid[names[j]][digits[j]]] for j in range(d)}
    sub[names[d]] = list(grid[names[d]][digits[d] : digits[d] + n])
    for j in range(d + 1, k):
        sub[names[j]] = list(grid[names[j]])
    return sub


def sub_grids(grid: Mapping[str, Sequence[Any]], target: int) -> Iterator[tuple[int, dict[str, list[Any]]]]:
    """Every piece of :func:`sub_grid` in order, as ``(first plan index, sub-grid)``."""
    pos, total = 0, grid_size(grid)
    while pos < total:
        sub = sub_grid(grid, pos, target)
        yield pos, sub
        pos += grid_size(sub)


def parse_values(field: str, text: str) -> list[Any]:
    """The values of one grid row (``A:B``, ``A:B:STEP``, ``V1|V2``, choice names), checked against the limits.

    >>> parse_values("weight_bits", "4:6")
    [4, 5, 6]
    >>> parse_values("weight_bits", "0:3")
    Traceback (most recent call last):
    ...
    ValueError: weight_bits values must be between 1 and 32, not 0
    """
    if field not in PLAN_FIELDS:
        raise ValueError(f"grid field must be a plan key ({', '.join(PLAN_FIELDS)}), not {field!r}")
    if not text.strip():
        raise ValueError(f"{field} values must not be empty, not {text!r}")
    values = parse_grid(f"{field}={text}")[field]
    if not values:
        raise ValueError(f"{field} values must not be an empty range, not {text!r}")
    for v in values:
        if field in INT_LIMITS:
            lo, hi = INT_LIMITS[field]
            if not lo <= v <= hi:
                raise ValueError(f"{field} values must be between {lo} and {hi}, not {v!r}")
        elif v not in CHOICES[field]:
            raise ValueError(f"{field} values must be one of {', '.join(CHOICES[field])}, not {v!r}")
    return values


def _span(field: str, current: int, below: int, above: int) -> list[int]:
    lo, hi = INT_LIMITS[field]
    return list(range(max(lo, current - below), min(hi, current + above) + 1))


def default_grid(network: Network, plan: Plan, layer: int = 0) -> dict[str, list[Any]]:
    """A small grid around ``plan``'s widths on ``layer``: weights 4 bits narrower to the same,
    the table (sigmoid/tanh) or the output (relu/identity) 3 bits narrower to the same.

    >>> from fxnet_widgets.core.network import Network
    >>> net = Network.from_layers([([[1.0, 2.0]], [0.0], "sigmoid")])
    >>> plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=16, out_bits=8, table_bits=10, table_frac=6)
    >>> default_grid(net, plan)
    {'weight_bits': [4, 5, 6, 7, 8], 'table_bits': [7, 8, 9, 10]}
    """
    lp = plan.layers[layer]
    grid: dict[str, list[Any]] = {"weight_bits": _span("weight_bits", lp.weight_bits, 4, 0)}
    if network.layers[layer].has_table and lp.table_bits is not None:
        grid["table_bits"] = _span("table_bits", lp.table_bits, 3, 0)
    else:
        grid["out_bits"] = _span("out_bits", lp.out_bits, 3, 0)
    return grid


def _text_of(values: Sequence[Any]) -> str:
    ints = all(isinstance(v, int) for v in values)
    if ints and len(values) > 2 and list(values) == list(range(values[0], values[-1] + 1)):
        return f"{values[0]}:{values[-1]}"
    return "|".join(str(v) for v in values)


class _GridRow(w.HBox):
    def __init__(self, editor: GridEditor, field: str, values: Sequence[Any]) -> None:
        self.field = w.Dropdown(options=list(PLAN_FIELDS), value=field, layout=w.Layout(width="130px"))
        self.values = w.Text(value=_text_of(values), placeholder="4:8 or 4|6|8", layout=w.Layout(width="150px"))
        self.error = w.HTML("")
        self.remove = w.Button(description="remove", layout=w.Layout(width="70px"))
        self.remove.on_click(lambda _b: editor.remove_row(self))
        for c in (self.field, self.values):
            c.observe(lambda _c: editor.check(), names="value")
        super().__init__([self.field, self.values, self.remove, self.error])


class GridEditor(w.VBox):
    """Rows of (plan field, values), the layer the grid changes, and two sweep options.

    Attributes
    ----------
    rows : list of the rows (``row.field``, ``row.values``, ``row.error`` widgets)
    layer : Dropdown: "every layer" (-1) or one layer index (see :attr:`layer_index`)
    keep_range, safe_acc : the ``sweep`` options of the same names
    """

    def __init__(self, network: Network, plan: Plan, grid: Mapping[str, Any] | str | None = None,
                 layer: int | None = 0) -> None:  # fmt: skip
        self.network = network
        self.rows: list[_GridRow] = []
        names = [(f"layer {i + 1} ({L.activation})", i) for i, L in enumerate(network.layers)]
        # -1 stands for "every layer" (a Dropdown shows no selection for a None value)
        self.layer = w.Dropdown(options=[("every layer", -1), *names], value=-1 if layer is None else layer,
                                description="layer")  # fmt: skip
        self.keep_range = w.Checkbox(value=True, description="keep range (move frac with width)", indent=False)
        self.safe_acc = w.Checkbox(value=True, description="safe accumulators", indent=False)
        self.add = w.Button(description="add field")
        self.add.on_click(lambda _b: self.add_row("weight_frac", [plan.layers[0].weight_frac]))
        self.count = w.HTML("")
        self._box = w.VBox([])
        super().__init__([self.layer, self._box, w.HBox([self.add, self.keep_range, self.safe_acc]), self.count])
        if grid is None:
            grid = default_grid(network, plan, 0 if layer is None else layer)
        elif isinstance(grid, str):
            grid = parse_grid(grid)
        for field, values in grid.items():
            self.add_row(field, [values] if isinstance(values, (int, str)) else list(values))

    @property
    def layer_index(self) -> int | None:
        """The layer the grid changes (None: every layer), as ``sweep``'s ``layer``."""
        v = self.layer.value
        return None if v is None or v < 0 else int(v)

    def add_row(self, field: str, values: Sequence[Any]) -> None:
        self.rows.append(_GridRow(self, field, values))
        self._box.children = tuple(self.rows)
        self.check()

    def remove_row(self, row: _GridRow) -> None:
        self.rows.remove(row)
        self._box.children = tuple(self.rows)
        self.check()

    def errors(self) -> dict[int, str]:
        """Row index -> why the row is refused (also shown next to the row)."""
        out: dict[int, str] = {}
        seen: set[str] = set()
        for i, row in enumerate(self.rows):
            try:
                if row.field.value in seen:
                    raise ValueError(f"grid field {row.field.value} must be given once, not twice")
                seen.add(row.field.value)
                parse_values(row.field.value, row.values.value)
            except ValueError as exc:
                out[i] = str(exc)
        return out

    def check(self) -> bool:
        """Show each row's reason (or nothing); True when the whole grid is usable."""
        errs = self.errors()
        for i, row in enumerate(self.rows):
            msg = errs.get(i, "")
            row.error.value = f"<span style='color:#b00020'>{html.escape(msg)}</span>" if msg else ""
        if not self.rows:
            self.count.value = "<span style='color:#b00020'>grid must have at least one field, not none</span>"
            return False
        if errs:
            self.count.value = ""
            return False
        self.count.value = f"{grid_size(self.grid)} plans"
        return True

    @property
    def grid(self) -> dict[str, list[Any]]:
        """The grid as ``{field: values}``; ValueError naming the first refused row."""
        if not self.rows:
            raise ValueError("grid must have at least one field, not none")
        errs = self.errors()
        if errs:
            i = min(errs)
            raise ValueError(f"grid row {i + 1}: {errs[i]}")
        return {row.field.value: parse_values(row.field.value, row.values.value) for row in self.rows}

    def set_grid(self, grid: Mapping[str, Sequence[Any]]) -> None:
        """Replace every row by the fields of ``grid``."""
        self.rows = [_GridRow(self, f, list(v)) for f, v in grid.items()]
        self._box.children = tuple(self.rows)
        self.check()
