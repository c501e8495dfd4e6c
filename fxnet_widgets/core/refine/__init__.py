"""Better integer networks for the same plan: per-weight rounding choice and fixed-point-aware fine-tuning.

:func:`refine` takes a float network, a plan and samples, and returns a
:class:`Refinement` whose ``network`` has weights and biases that are exactly
``q / 2**frac``: the plan reproduces the chosen integers with no rounding, so the
refined network goes wherever a network goes (``emulate``, ``export``, the
datapath). Two methods, alone or together:

* ``rounding``: each integer weight and bias is chosen among its nearby integers
  to minimise the disagreements of the exact integer network (``_rounding``);
* ``finetune``: quantisation-aware training, straight-through gradients through
  the bit-exact forward pass (``_finetune``).

Every figure is measured with :func:`~fxnet_widgets.core.kernel.emulate`.
"""

from ._api import METHODS, TARGETS, Figures, Refinement, exact_network, refine

__all__ = ["METHODS", "TARGETS", "Figures", "Refinement", "exact_network", "refine"]
