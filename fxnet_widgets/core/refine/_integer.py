"""The integer forward pass that the refinement searches with (incremental, on distinct samples).

The search tries thousands of integer weight sets, so it cannot afford a full
:func:`~fxnet_widgets.core.kernel.emulate` per try. :class:`IntegerPass` holds
the exact sums ``s`` of every layer for the *distinct* input rows (each with a
count), updates one neuron's sums in place when one of its integers changes, and
applies steps 4-7 of the contract with the kernel's own
:func:`~fxnet_widgets.core.kernel.post_accumulate` (the same function, so the same
bits). Every figure the refinement reports is still measured with ``emulate``;
:func:`~fxnet_widgets.core.refine.refine` also checks that both agree.
"""

from __future__ import annotations

import numpy as np

from ..kernel import IntegerNetwork, post_accumulate

__all__ = ["Samples", "IntegerPass", "decisions_from_codes"]


class Samples:
    """Distinct rows of (input codes, target) with their counts.

    ``inputs`` is n_in x P (int64), ``target`` (P,) the wanted decision of each
    row and ``counts`` (P,) how many of the given samples it stands for.
    """

    def __init__(self, codes: np.ndarray, target: np.ndarray) -> None:
        flat = np.asarray(codes, dtype=np.int64)
        tgt = np.asarray(target, dtype=np.int64).reshape(-1, 1)
        rows, counts = np.unique(np.concatenate([flat, tgt], axis=1), axis=0, return_counts=True)
        self.inputs = np.ascontiguousarray(rows[:, :-1].T)
        self.target = np.ascontiguousarray(rows[:, -1])
        self.counts = counts.astype(np.int64)
        self.total = int(flat.shape[0])

    @property
    def distinct(self) -> int:
        return int(self.target.shape[0])


def decisions_from_codes(codes: np.ndarray, threshold_code: int | None) -> np.ndarray:
    """Step 8 of the contract on the last layer's codes (n_out x P)."""
    if codes.shape[0] == 1:
        assert threshold_code is not None
        return (codes[0] >= threshold_code).astype(np.int64)
    return np.argmax(codes, axis=0).astype(np.int64)


class IntegerPass:
    """The integer network on :class:`Samples`, with settable integer weights and biases.

    ``template`` supplies everything but the integers (shifts, tables, clamps,
    modes): those depend on the plan only. ``q_w[l]`` (n_out x n_in) and
    ``q_b[l]`` (n_out,) are the integers in use; :meth:`set` changes one of
    them (``i == n_in`` is the bias) and :meth:`energy` brings the pass up to date.
    """

    def __init__(self, template: IntegerNetwork, samples: Samples,
                 q_w: list[np.ndarray], q_b: list[np.ndarray]) -> None:
        self.layers = template.layers
        self.threshold_code = template.threshold_code
        self.samples = samples
        self.q_w = [np.array(a, dtype=np.int64) for a in q_w]
        self.q_b = [np.array(a, dtype=np.int64) for a in q_b]
        self.u: list[np.ndarray] = [samples.inputs]
        self.s: list[np.ndarray] = []
        for li in range(len(self.layers)):
            self.s.append(self.q_b[li][:, None] + self.q_w[li] @ self.u[li])
            self.u.append(self._codes(li, self.s[li]))
        self._dirty: dict[int, set[int]] = {}
        last = self.layers[-1]
        self._span = float(last.code_max - last.code_min + 1)

    # -- evaluation ---------------------------------------------------------------
    def _codes(self, li: int, s: np.ndarray) -> np.ndarray:
        return np.asarray(post_accumulate(self.layers[li], s)["codes"], dtype=np.int64)

    def set(self, li: int, j: int, i: int, value: int) -> None:
        """Use integer ``value`` for weight ``(j, i)`` of layer ``li`` (``i == n_in``: the bias)."""
        n_in = self.q_w[li].shape[1]
        old = int(self.q_b[li][j] if i == n_in else self.q_w[li][j, i])
        d = int(value) - old
        if d == 0:
            return
        if i == n_in:
            self.q_b[li][j] = value
            self.s[li][j] += d
        else:
            self.q_w[li][j, i] = value
            self.s[li][j] += d * self.u[li][i]
        self._dirty.setdefault(li, set()).add(j)

    def refresh(self) -> None:
        """Apply steps 4-7 to every changed neuron and recompute what depends on it."""
        if not self._dirty:
            return
        dirty, self._dirty = self._dirty, {}
        upstream_changed = False
        for li in range(min(dirty), len(self.layers)):
            if upstream_changed:
                self.s[li] = self.q_b[li][:, None] + self.q_w[li] @ self.u[li]
                new = self._codes(li, self.s[li])
                upstream_changed = not np.array_equal(new, self.u[li + 1])
                self.u[li + 1] = new
            elif li in dirty:
                rows = sorted(dirty[li])
                new = self._codes(li, self.s[li][rows])
                upstream_changed = not np.array_equal(new, self.u[li + 1][rows])
                self.u[li + 1][rows] = new

    def decisions(self) -> np.ndarray:
        self.refresh()
        return decisions_from_codes(self.u[-1], self.threshold_code)

    def errors(self) -> int:
        """Samples (with their counts) whose decision differs from the target."""
        wrong = self.decisions() != self.samples.target
        return int(self.samples.counts[wrong].sum())

    def energy(self) -> tuple[float, int]:
        """``(objective, errors)``: errors, plus a tie-break below one error.

        The tie-break is the wrong samples' distance (in output codes) from the
        decision they should have made, scaled so that the whole of it stays
        below one error: fewer errors always win; among equal errors, nearer wins.
        """
        self.refresh()
        codes = self.u[-1]
        target = self.samples.target
        counts = self.samples.counts
        dec = decisions_from_codes(codes, self.threshold_code)
        wrong = dec != target
        errors = int(counts[wrong].sum())
        if not errors:
            return 0.0, 0
        if codes.shape[0] == 1:
            assert self.threshold_code is not None
            c = codes[0, wrong]
            dist = np.where(target[wrong] == 1, self.threshold_code - c, c - self.threshold_code + 1)
        else:
            cw = codes[:, wrong]
            dist = cw.max(axis=0) - cw[target[wrong], np.arange(cw.shape[1])] + 1
        tie = float((dist * counts[wrong]).sum()) / (self._span * self.samples.total + 1.0)
        return errors + tie, errors
