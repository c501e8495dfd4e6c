"""The record of one evaluated plan."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from ...plan import Plan

__all__ = ["SweepRecord"]


@dataclass(frozen=True)
class SweepRecord:
    """One evaluated plan.

    Attributes
    ----------
    index : position in the sweep (grid order)
    settings : the grid values of this plan, ``((field, value), ...)``
    plan : the plan evaluated (with its accumulator widths if they were derived)
    cost : the chosen cost total (``cost_key``); None if the plan was refused
    cost_key : which total ``cost`` is
    costs : every total of :meth:`HardwareCost.totals`
    mismatch, mismatch_fraction : decisions that differ from float
    max_abs_error_lsb, mean_abs_error_lsb : output error in LSBs (max / mean over outputs)
    accuracy : against labels, or None
    events : event totals on the data
    ties : decisions of several outputs decided by the lowest-index rule (two or more top codes equal)
    tied_agreeing : those of them that agree with float (by the index order, not by the codes)
    error : why the kernel refused the plan (then every metric is None/empty)
    refined_network : with ``refine=``, the document of the refined network these figures are of
        (weights exactly representable under ``plan``; every figure against the original float), else None
    refinement : with ``refined_network``, the refinement's summary (:meth:`Refinement.to_dict`, no timing)
    """

    index: int
    settings: tuple[tuple[str, Any], ...]
    plan: Plan
    cost: int | None
    cost_key: str
    costs: Mapping[str, int] = field(default_factory=dict, hash=False)
    mismatch: int | None = None
    mismatch_fraction: float | None = None
    max_abs_error_lsb: float | None = None
    mean_abs_error_lsb: float | None = None
    accuracy: float | None = None
    events: Mapping[str, int] = field(default_factory=dict, hash=False)
    error: str | None = None
    ties: int | None = None
    tied_agreeing: int | None = None
    refined_network: Mapping[str, Any] | None = field(default=None, hash=False)
    refinement: Mapping[str, Any] | None = field(default=None, hash=False)

    @property
    def refined(self) -> bool:
        """True when the figures are those of a refined network (:attr:`refined_network`)."""
        return self.refined_network is not None

    @property
    def strict_mismatch(self) -> int | None:
        """Decisions that differ from float or agree only through a tie (None if refused)."""
        if self.mismatch is None:
            return None
        return self.mismatch + (self.tied_agreeing or 0)

    @property
    def ok(self) -> bool:
        """True when the plan was evaluated (not refused)."""
        return self.error is None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields (the plan as its document)."""
        return {
            "index": self.index,
            "settings": {k: v for k, v in self.settings},
            "cost": self.cost,
            "cost_key": self.cost_key,
            "costs": dict(self.costs),
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch_fraction,
            "max_abs_error_lsb": self.max_abs_error_lsb,
            "mean_abs_error_lsb": self.mean_abs_error_lsb,
            "accuracy": self.accuracy,
            "events": dict(self.events),
            "error": self.error,
            "ties": self.ties,
            "tied_agreeing": self.tied_agreeing,
            "plan": self.plan.to_dict(),
            "refined": self.refined,
            "refinement": None if self.refinement is None else dict(self.refinement),
            "refined_network": None if self.refined_network is None else dict(self.refined_network),
        }
