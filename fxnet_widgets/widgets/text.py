"""Deterministic text of a session result (notebooks print it; reports carry it)."""

from __future__ import annotations

import numpy as np

from .results import SessionResult

__all__ = ["summary_text", "ties_text"]


def ties_text(ties: dict[tuple[int, int], int], classes: tuple[str, ...]) -> str:
    """``"ripe/green 3, ..."``: argmax ties per class pair (lower index wins), or ``"none"``.

    >>> ties_text({(0, 1): 2, (0, 2): 0}, ("a", "b", "c"))
    'a/b 2'
    """
    parts = [f"{classes[i]}/{classes[j]} {n}" for (i, j), n in sorted(ties.items()) if n]
    return ", ".join(parts) if parts else "none"


def summary_text(r: SessionResult, error: str = "") -> str:
    """Plan, safe widths, disagreements, events (npz keys) and, for several outputs, argmax ties."""
    lines = [f"plan: {r.plan!r}"]
    for d, safe in zip(r.descriptions, r.layer_safe_acc_bits):
        lines.append(f"  {d}; safe accumulator {safe} b")
    if r.image is not None:
        lines.append(f"image ({r.image.note}): {r.image.mismatch} of {r.image.fixed.size} pixels differ from float")
    if r.samples is not None:
        s = r.samples
        line = f"samples: {int(np.count_nonzero(s.fixed != s.float_))} of {s.fixed.size} differ from float"
        if s.labels is not None:
            line += f"; fixed point right on {int(np.count_nonzero(s.fixed == s.labels))}"
            line += f", float right on {int(np.count_nonzero(s.float_ == s.labels))}"
        lines.append(line)
    if r.slices is not None:
        parts = [f"{sl.name} at {sl.position}: {sl.mismatch}" for sl in r.slices]
        lines.append(f"slices ({r.slices[0].x.size}x{r.slices[0].y.size}) differing cells: " + ", ".join(parts))
    if r.cube is not None:
        n = r.cube.grid.size
        lines.append(f"cube grid {n}x{n}x{n}: {r.cube.mismatch} points differ from float")
    ev = r.event_totals()
    lines.append(f"events on {r.data_name}: " + ", ".join(f"{k} {v}" for k, v in ev.items()))
    for f in r.figures:
        if f.ties:
            lines.append(f"argmax ties on {f.name} (lower index wins): {ties_text(f.ties, r.classes)}")
    if error:
        lines.append(f"error: {error}")
    return "\n".join(lines)
