"""Design-space search: sweeps over plan fields, the Pareto front, and ``tune``.

Every plan is judged on the same data by two numbers: its cost (one total of
:func:`~fxnet_widgets.core.analysis.cost.hardware_cost`, ``total_bits`` unless
told otherwise) and its disagreement with the float network (the fraction of
decisions that differ).

Evaluation runs on a local process pool by default, or on any
:class:`concurrent.futures.Executor` (a ``dask.distributed`` ``Client`` works
as one). The plans are cut into a few chunks per worker; each task carries the
network document, the input codes and its chunk's plan documents, so the data
travels once per chunk, never once per plan (to a local pool, once per worker:
through one shared-memory block, :mod:`.shared`). Results are identical whatever
runs them: every plan is evaluated by the same deterministic code and records
come back in grid order.

Modules: :mod:`.executors` (where plans run, worker counts), :mod:`.progress`
(progress callbacks), :mod:`.records` (:class:`SweepRecord`), :mod:`.evaluate`
(chunked evaluation), :mod:`.grid` (grid text, checks, applying settings),
:mod:`.sweeps`, :mod:`.pareto`, :mod:`.tuning`, :mod:`.fast` (one plan's record on the
compiled path), :mod:`.shared`. Starting plans are in
:mod:`fxnet_widgets.core.starting`.

Examples
--------
>>> import numpy as np
>>> from fxnet_widgets.core.network import Network
>>> net = Network.from_layers([([[2.0, -1.0, 0.5]], [-0.5], "sigmoid")])
>>> codes = np.random.default_rng(0).integers(0, 256, (2000, 3))
>>> recs = sweep(net, codes, {"table_bits": [6, 8, 10]}, executor=SerialExecutor())
>>> [r.settings for r in recs]
[(('table_bits', 6),), (('table_bits', 8),), (('table_bits', 10),)]
>>> all(a.cost < b.cost for a, b in zip(recs, recs[1:]))
True
"""

from ...starting import start_plan, with_safe_acc
from .evaluate import PlanTask, evaluate_plans
from .executors import INLINE_WORK, SerialExecutor, local_pool
from .grid import parse_grid
from .pareto import pareto_front
from .progress import Progress, text_progress
from .records import SweepRecord
from .refining import REFINE_METHODS, RefineSettings
from .sweeps import sweep
from .tuning import TUNE_MOVES, Move, TuneResult, TuneStep, tune

__all__ = [
    "INLINE_WORK",
    "Move",
    "PlanTask",
    "REFINE_METHODS",
    "RefineSettings",
    "Progress",
    "SerialExecutor",
    "SweepRecord",
    "TuneResult",
    "TuneStep",
    "TUNE_MOVES",
    "evaluate_plans",
    "local_pool",
    "sweep",
    "pareto_front",
    "tune",
    "start_plan",
    "with_safe_acc",
    "parse_grid",
    "text_progress",
]
