"""Grids of plan settings: the text form, the checks, and applying one combination to a plan.

Values are checked by the plan's own field check (one set of limits, those of
:mod:`fxnet_widgets.core.plan`), so a grid value is refused with the same rule
as a plan value.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace
from typing import Any

import numpy as np

from ...network import Network
from ...plan import CHOICES, PLAN_FIELDS, Plan
from ...plan import check_field as check_plan_field

__all__ = ["TABLE_FIELDS", "KEEP_RANGE_PAIRS", "parse_grid", "check_grid", "apply_settings"]

#: plan fields only sigmoid/tanh layers have (a grid over them skips relu/identity layers)
TABLE_FIELDS = ("table_bits", "table_frac", "index_round", "table_round", "table_sample")
#: (width, frac) pairs that move together under ``keep_range``
KEEP_RANGE_PAIRS = (("weight_bits", "weight_frac"), ("table_bits", "table_frac"), ("out_bits", "out_frac"))


def _field_name(name: Any) -> str:
    if name not in PLAN_FIELDS:
        raise ValueError(f"grid field must be a plan key ({', '.join(PLAN_FIELDS)}), not {name!r}")
    return str(name)


def parse_grid(spec: str) -> dict[str, list[Any]]:
    """Parse ``'weight_frac=3:8,table_bits=8:14'`` into ``{field: values}``.

    Each item is ``FIELD=VALUES`` with VALUES ``A:B`` (integers A to B, both
    included), ``A:B:STEP``, ``V`` or ``V1|V2|...`` (integers, or the names of a
    choice field such as ``acc_overflow=wrap|saturate``).

    >>> parse_grid("weight_frac=3:5,acc_overflow=wrap|saturate")
    {'weight_frac': [3, 4, 5], 'acc_overflow': ['wrap', 'saturate']}
    """
    if not isinstance(spec, str):
        raise TypeError(f"grid must be a string, not {spec!r}")
    grid: dict[str, list[Any]] = {}
    for item in (s.strip() for s in spec.split(",")):
        if not item:
            continue
        name, eq, values = item.partition("=")
        name, values = name.strip(), values.strip()
        if not eq or not values:
            raise ValueError(f"grid item must be FIELD=VALUES, not {item!r}")
        if name in grid:
            raise ValueError(f"grid field {name!r} is given twice")
        _field_name(name)
        if name in CHOICES:
            grid[name] = [v.strip() for v in values.split("|")]
            continue
        try:
            if ":" in values:
                parts = [int(v) for v in values.split(":")]
                if len(parts) not in (2, 3) or (len(parts) == 3 and parts[2] <= 0):
                    raise ValueError
                step = parts[2] if len(parts) == 3 else 1
                grid[name] = list(range(parts[0], parts[1] + 1, step))
            else:
                grid[name] = [int(v) for v in values.split("|")]
        except ValueError:
            raise ValueError(
                f"grid values of {name} must be A:B, A:B:STEP (STEP > 0) or V1|V2 integers, not {values!r}"
            ) from None
        if not grid[name]:
            raise ValueError(f"grid values of {name} must not be empty, not {values!r}")
    if not grid:
        raise ValueError(f"grid must name at least one field, not {spec!r}")
    return grid


def check_grid(grid: Any) -> dict[str, list[Any]]:
    """A grid (mapping or :func:`parse_grid` text) with every value checked as a plan value.

    >>> check_grid({"table_bits": 8, "acc_overflow": ["wrap"]})
    {'table_bits': [8], 'acc_overflow': ['wrap']}
    """
    if isinstance(grid, str):
        grid = parse_grid(grid)
    if not isinstance(grid, Mapping) or not grid:
        raise TypeError(f"grid must be a non-empty mapping of plan field to values, not {grid!r}")
    out: dict[str, list[Any]] = {}
    for name, values in grid.items():
        _field_name(name)
        vals = [values] if isinstance(values, (int, str, np.integer)) else list(values)
        if not vals:
            raise ValueError(f"grid values of {name} must not be empty, not {values!r}")
        out[name] = [check_plan_field(name, int(v) if isinstance(v, np.integer) else v, "grid values of ")
                     for v in vals]  # fmt: skip
    return out


def apply_settings(
    network: Network, base: Plan, settings: Mapping[str, Any], layer: int | None, keep_range: bool
) -> Plan:
    """``base`` with ``settings`` on ``layer`` (None: every layer; table fields skip relu/identity).

    With ``keep_range``, a width given without its frac (or a frac without its
    width) moves the other by the same amount, so the range stays that of ``base``.
    """
    layers = list(base.layers)
    for i in range(len(layers)) if layer is None else [layer]:
        vals = dict(settings)
        lp = layers[i]
        if network.layers[i].activation in ("relu", "identity"):
            for k in TABLE_FIELDS:
                vals.pop(k, None)
        if keep_range:
            for bits, frac in KEEP_RANGE_PAIRS:
                old_bits, old_frac = getattr(lp, bits), getattr(lp, frac)
                if old_bits is None or old_frac is None or (bits in vals) == (frac in vals):
                    continue
                if bits in vals:
                    vals[frac] = old_frac + vals[bits] - old_bits
                else:
                    vals[bits] = old_bits + vals[frac] - old_frac
        where = f"layers[{i}]."
        for k, v in vals.items():
            check_plan_field(k, v, where)
        layers[i] = replace(lp, **vals)
    return Plan(tuple(layers)).check(network)

