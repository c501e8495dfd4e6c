"""Changing the network a session computes with (the explorer's "refine" swaps a refined one in).

A refined network (:func:`~fxnet_widgets.core.refine.refine`) has the same inputs,
layers, activations and classes as the one it came from; only its weights and
biases differ (they are exact under one plan). :func:`use_network` checks that,
points the session and its data at the new network, forgets every part computed
with the old one and computes the newest state once (the same coalescing update
as any other change). The data's reference network (``session.data.reference``,
the network the session was made with) stays: "float" in every view is still its
float pass, while the integers come from the network swapped in. No widgets here.
"""

from __future__ import annotations

from typing import Any

from ..core.network import Network

__all__ = ["use_network", "same_layout"]


def same_layout(a: Network, b: Network) -> str:
    """"" when ``b`` can stand in for ``a`` in a session, else what differs (one phrase)."""
    for what, x, y in (
        ("shape", a.shape, b.shape),
        ("input names", a.input_names, b.input_names),
        ("input bits", a.input_bits, b.input_bits),
        ("classes", a.classes, b.classes),
        ("threshold", a.threshold, b.threshold),
        ("activations", tuple(L.activation for L in a.layers), tuple(L.activation for L in b.layers)),
    ):
        if x != y:
            return f"{what} {y!r} instead of {x!r}"
    return ""


def use_network(session: Any, network: Network) -> None:
    """Make ``session`` compute its integers with ``network`` (same layout; the plan must fit it).

    The views keep comparing with the float pass of ``session.data.reference`` (the original network).

    Raises TypeError for a non-network, ValueError (one line) for a network of another layout
    or one the current plan does not fit; the session is unchanged then.
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    differs = same_layout(session.network, network)
    if differs:
        raise ValueError(f"network must have the session network's layout, not {differs}")
    session.plan.check(network)
    if network == session.network:
        return
    session.network = network
    session.data.network = network
    session.refresh()  # every cached part was computed with the old network
