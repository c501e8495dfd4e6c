"""The bit-exact integer network: what the hardware computes, per ``semantics.md``.

Two parts:

* :func:`build_integer_network` turns a float :class:`~fxnet_widgets.core.network.Network` and
  a :class:`~fxnet_widgets.core.plan.Plan` into an :class:`IntegerNetwork`: the
  integer weights and biases, shifts, tables, ranges, static events
  (``weight_clip``, ``bias_clip``), the guaranteed-safe accumulator width of
  every neuron and the int64-safety proof. Cached by value.
* :func:`emulate` runs input codes through it and returns an :class:`Emulation`
  with every accumulator (``s_A``), every code, the decisions and the per-neuron
  event counts. Work is cached by value: the same image with a new plan reuses
  its per-image decomposition, and layers whose plan prefix is unchanged are not
  recomputed.

Modules, one job each:

``caches``      the value-keyed caches (:func:`clear_caches`, :func:`cache_stats`)
``layers``      the integer network's records (:class:`IntegerLayer`, per-stage formats, event names)
``tables``      the one activation-table builder (contract step 6, exact rounding)
``build``       steps 1-7: :func:`build_integer_network` builds the integer network
``accumulate``  steps 4-7 on exact sums (:func:`post_accumulate`)
``evaluate``    the fast paths: per-image decomposition, exact sums, one layer's run
``steps``       steps 4-7 over ranges of sums from few evaluations (the compiled path's per-layer tables)
``emulation``   :func:`emulate` and its result, :class:`Emulation`

Examples
--------
>>> from fxnet_widgets.core.network import Network
>>> from fxnet_widgets.core.plan import Plan
>>> net = Network.from_layers([([[1.0, 1.0, 1.0]], [-1.0], "sigmoid")])
>>> plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18,
...                     table_bits=14, table_frac=10, out_bits=8)
>>> import numpy as np
>>> r = emulate(net, plan, np.array([[128, 128, 128]]))
>>> int(r.acc[0][0, 0]), int(r.out_codes[0, 0]), int(r.decisions[0])
(4096, 159, 1)
"""

from .accumulate import post_accumulate
from .build import build_integer_network
from .caches import cache_stats, clear_caches
from .emulation import Emulation, emulate
from .layers import DATA_EVENTS, EVENT_NAMES, STATIC_EVENTS, Bounds, CodeFormat, IntegerLayer, IntegerNetwork
from .tables import build_table, table_inputs

__all__ = [
    "EVENT_NAMES",
    "DATA_EVENTS",
    "STATIC_EVENTS",
    "CodeFormat",
    "Bounds",
    "IntegerLayer",
    "IntegerNetwork",
    "Emulation",
    "build_integer_network",
    "emulate",
    "post_accumulate",
    "build_table",
    "table_inputs",
    "clear_caches",
    "cache_stats",
]
