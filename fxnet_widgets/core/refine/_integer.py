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

__all__ = ["Samples", "IntegerPass", "decisions_from_codes", "LUT_SPAN"]

#: the widest range of exact sums tabulated per layer (wider: post_accumulate on every sample)
LUT_SPAN = 1 << 20


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
        self._lut: list[tuple[int, np.ndarray] | None] = [None] * len(self.layers)
        # the range of every layer's inputs: the data's for layer 1, the previous table's or clamp's after
        ins = samples.inputs
        self._u_range = [(ins.min(axis=1), ins.max(axis=1)) if ins.size else (np.zeros(ins.shape[0], np.int64),) * 2]
        for L in self.layers[:-1]:
            self._u_range.append((np.full(L.n_out, L.code_min, np.int64), np.full(L.n_out, L.code_max, np.int64)))
        for li in range(len(self.layers)):
            self.s.append(self._sums(li))
            self.u.append(self._codes(li, self.s[li], slice(None)))
        self._dirty: dict[int, set[int]] = {}
        last = self.layers[-1]
        self._span = float(last.code_max - last.code_min + 1)
        self._cost: tuple[np.ndarray, np.ndarray, int] | None = None
        if last.n_out == 1 and self.threshold_code is not None and samples.target.size:
            # per (target, code), flattened: is it an error, and how far from the right decision, as one
            # integer error * M + distance: M exceeds any sum of distances, so one dot product gives both
            c = np.arange(last.code_min, last.code_max + 1, dtype=np.int64)
            thr = self.threshold_code
            wrong = np.concatenate([c >= thr, c < thr]).astype(np.int64)
            dist = np.concatenate([c - thr + 1, thr - c]) * wrong
            offset = samples.target * c.shape[0] - last.code_min
            m = int(dist.max(initial=0)) * samples.total + 1
            if m * (samples.total + 1) < 1 << 62:  # no int64 overflow in the dot product (else: the general path)
                self._cost = (wrong * m + dist, offset, m)

    # -- evaluation ---------------------------------------------------------------
    def _sums(self, li: int) -> np.ndarray:
        """Exact sums ``q_b + q_w u`` of a layer (n_out x P, int64)."""
        q_w, u = self.q_w[li], self.u[li]
        if q_w.size > 64:
            return self.q_b[li][:, None] + q_w @ u
        s = np.repeat(self.q_b[li][:, None], u.shape[1], axis=1)
        for i in range(q_w.shape[1]):  # a few multiply-adds beat numpy's integer matmul on small layers
            s += q_w[:, i : i + 1] * u[i]
        return s

    def _codes(self, li: int, s: np.ndarray, rows: slice | list[int]) -> np.ndarray:
        """Steps 4-7 on exact sums: the kernel's post_accumulate, tabulated once over the sums' range.

        The table covers the interval bound of the sums of ``rows`` (from their integers and the
        range of the layer's inputs), with headroom, and is rebuilt when a bound leaves it.
        """
        layer = self.layers[li]
        if not s.size:
            return np.asarray(post_accumulate(layer, s)["codes"], dtype=np.int64)
        q_w, q_b = self.q_w[li][rows], self.q_b[li][rows]
        u_lo, u_hi = self._u_range[li]
        a, b = q_w * u_lo, q_w * u_hi
        lo = int((q_b + np.minimum(a, b).sum(axis=1)).min())
        hi = int((q_b + np.maximum(a, b).sum(axis=1)).max())
        lut = self._lut[li]
        if lut is None or lo < lut[0] or hi >= lut[0] + lut[1].shape[0]:
            if lut is not None:
                lo, hi = min(lo, lut[0]), max(hi, lut[0] + lut[1].shape[0] - 1)
            pad = (hi - lo) // 4 + 16  # headroom: nearby integers do not rebuild it
            lo, hi = lo - pad, hi + pad
            if hi - lo + 1 > LUT_SPAN:
                return np.asarray(post_accumulate(layer, s)["codes"], dtype=np.int64)
            table = np.asarray(post_accumulate(layer, np.arange(lo, hi + 1, dtype=np.int64))["codes"], dtype=np.int64)
            lut = self._lut[li] = (lo, table)
        return lut[1].take(s - lut[0])

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
        first = min(dirty)
        for li in range(first, len(self.layers)):
            if li > first:  # its inputs changed: the whole layer again
                self.s[li] = self._sums(li)
                self.u[li + 1] = self._codes(li, self.s[li], slice(None))
            else:
                rows = sorted(dirty[li])
                sel: slice | list[int] = slice(rows[0], rows[0] + 1) if len(rows) == 1 else rows
                self.u[li + 1][sel] = self._codes(li, self.s[li][sel], sel)

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
        if self._cost is not None:
            cost_t, offset, m = self._cost
            errors, dist = divmod(int(np.dot(counts, cost_t.take(offset + codes[0]))), m)
            if not errors:
                return 0.0, 0
            return errors + dist / (self._span * self.samples.total + 1.0), errors
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
        tie = int(np.dot(dist, counts[wrong])) / (self._span * self.samples.total + 1.0)
        return errors + tie, errors
