"""The datapath as levels of named signals, with exact value intervals.

:func:`build_levels` turns a :class:`~fxnet_widgets.core.export._design.Design`
(the integer network laid out for hardware) into a list of :class:`Level` s.
Each level computes its signals from the signals of the level before it only
(a value that goes on unchanged is an explicit ``pass``), so a pipeline
register bank may sit after any level without changing a bit.

Every signal carries the interval ``[lo, hi]`` of the values it can hold for
any input (interval arithmetic on Python ints, per ``semantics.md``), and is
exactly as wide as that interval needs. Arithmetic between signals of
different widths is done modulo ``2^width`` of the result, which is exact
because the result's interval proves it fits.

Operations (``Sig.op`` and ``Sig.args``):

``port (i,)``            input ``i`` of ``in_data`` (unsigned input bits)
``pass (src,)``          the same value
``const (v,)``           a constant
``mul (src, w)``         ``src * w`` (``w`` a weight code, or one signed power of two of it)
``add (a, b)``           ``a + b``
``wrap (src, A)``        two's-complement wrap to ``A`` bits
``sat (src, A)``         clamp to the signed ``A``-bit range
``round (src, k, mode)`` ``R(src / 2^k)`` for ``k > 0``
``clamp (src, m, ilo, ihi, offset)``  ``clamp(src * 2^m, ilo, ihi) - offset`` as a word
``rom (addr, layer)``    the table word at ``addr``
``ge (src, t)``          ``1`` iff ``src >= t``
``maxcode (a, b)`` / ``maxidx (a, ia, b, ib)``  one argmax step: ``b`` wins only if greater
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..analysis.csd import csd
from ..export._design import Design, LayerDesign
from ..formats import bits_for_range, shift_round

__all__ = ["Sig", "Level", "build_levels", "round_bits", "wrap_to"]


@dataclass(eq=False)
class Sig:
    """One named signal: ``width`` bits, two's complement if ``signed``, values in ``[lo, hi]``."""

    name: str
    width: int
    signed: bool
    lo: int
    hi: int
    op: str
    args: tuple[Any, ...]
    level: int = -1
    used: set[int] = field(default_factory=set)  # bit positions read by other signals or ports

    def use(self, msb: int, lsb: int = 0) -> None:
        self.used.update(range(lsb, min(msb, self.width - 1) + 1))


@dataclass(eq=False)
class Level:
    """Signals computed from the previous level; ``kind`` names the step, ``layer`` is 1-based (0: ports)."""

    kind: str
    layer: int
    title: str
    sigs: list[Sig]
    sum_end: bool = False  # the last adder-tree level of its layer
    layer_end: bool = False  # the level that gives the layer's output codes


def _value(name: str, lo: int, hi: int, op: str, *args: Any) -> Sig:
    return Sig(name, bits_for_range(lo, hi), True, lo, hi, op, args)


def _pass(src: Sig, name: str) -> Sig:
    return Sig(name, src.width, src.signed, src.lo, src.hi, "pass", (src,))


def _round_bounds(lo: int, hi: int, k: int, mode: str) -> tuple[int, int]:
    a = shift_round(np.array([lo, hi], dtype=np.int64), k, mode)
    return int(a[0]), int(a[1])


def _clamp_word(src: Sig, m: int, ilo: int, ihi: int, offset: int, width: int, signed: bool, name: str) -> Sig:
    """``clamp(src * 2^m, ilo, ihi) - offset`` (the kernel's steps 5 and 7, clamp decided before the shift)."""
    c_lo, c_hi = -((-ilo) >> m), ihi >> m
    vals = []
    if src.lo < c_lo:
        vals.append(ilo)
    if src.hi > c_hi:
        vals.append(ihi)
    mid_lo, mid_hi = max(src.lo, c_lo), min(src.hi, c_hi)
    if mid_lo <= mid_hi:
        vals += [mid_lo << m, mid_hi << m]
    return Sig(name, width, signed, min(vals) - offset, max(vals) - offset, "clamp", (src, m, ilo, ihi, offset))


def _digits(w: int, products: str) -> list[tuple[str, int]]:
    """The product terms of weight ``w``: ``("", w)``, or one ``(suffix, +-2^s)`` per nonzero CSD digit."""
    if products == "multiply":
        return [("", w)]
    ds = csd(w)
    return [(f"s{len(ds) - 1 - e}", d << (len(ds) - 1 - e)) for e, d in enumerate(ds) if d]


def _layer_levels(L: LayerDesign, inputs: list[Sig], levels: list[Level], products: str) -> list[Sig]:
    n, pre = L.number, f"l{L.number}"
    # products (and the bias as a constant term)
    terms: list[list[Sig]] = []
    prods: list[Sig] = []
    for j in range(L.n_out):
        row = []
        for i, u in enumerate(inputs):
            w = int(L.weights[j, i])
            if w == 0:
                continue
            for suffix, c in _digits(w, products):
                p_lo, p_hi = sorted((c * u.lo, c * u.hi))
                row.append(_value(f"{pre}_n{j}_p{i}{suffix}", p_lo, p_hi, "mul", u, c))
        b = int(L.biases[j])
        if b != 0 or not row:
            row.append(_value(f"{pre}_n{j}_bias", b, b, "const", b))
        terms.append(row)
        prods += row
    levels.append(Level("products", n, f"layer {n}: weight products", prods))
    # balanced adder trees, one level per adder depth
    n_levels = max((len(t) - 1).bit_length() for t in terms)
    for depth in range(1, n_levels + 1):
        sigs = []
        for j, row in enumerate(terms):
            new = []
            for e in range(0, len(row), 2):
                name = f"{pre}_n{j}_t{depth}_{e // 2}" if depth < n_levels else f"{pre}_n{j}_sum"
                if e + 1 < len(row):
                    x, y = row[e], row[e + 1]
                    new.append(_value(name, x.lo + y.lo, x.hi + y.hi, "add", x, y))
                else:
                    new.append(_pass(row[e], name))
            terms[j] = new
            sigs += new
        levels.append(Level("tree", n, f"layer {n}: adder tree, level {depth}", sigs))
    levels[-1].sum_end = True
    sums = [row[0] for row in terms]
    # one wrap/saturate stage on the full sum
    A = L.acc_bits
    alo, ahi = -(1 << (A - 1)), (1 << (A - 1)) - 1
    accs = []
    for j, s in enumerate(sums):
        name = f"{pre}_n{j}_acc"
        if alo <= s.lo and s.hi <= ahi:
            accs.append(_pass(s, name))
        elif L.acc_overflow == "wrap":
            accs.append(Sig(name, A, True, alo, ahi, "wrap", (s, A)))
        else:
            accs.append(_value(name, min(max(s.lo, alo), ahi), max(min(s.hi, ahi), alo), "sat", s, A))
    levels.append(Level("acc", n, f"layer {n}: accumulator ({A} b, {L.acc_overflow})", accs))
    # index rounding (right shift) and clamp (the table address, or the code of relu/identity)
    k = L.shift
    idx = accs
    if k > 0:
        idx = []
        for j, s in enumerate(accs):
            lo, hi = _round_bounds(s.lo, s.hi, k, L.index_round)
            idx.append(_value(f"{pre}_n{j}_idx", lo, hi, "round", s, k, L.index_round))
        levels.append(Level("round", n, f"layer {n}: index = {L.index_round}(acc / 2^{k})", idx))
    m = -k if k < 0 else 0
    words = []
    for j, s in enumerate(idx):
        if L.table is not None:
            assert L.table_bits is not None
            words.append(_clamp_word(s, m, L.index_min, L.index_max, L.index_min, L.table_bits, False,
                                     f"{pre}_n{j}_addr"))  # fmt: skip
        else:
            words.append(_clamp_word(s, m, L.out_min, L.out_max, 0, L.out_bits, L.out_signed, f"{pre}_n{j}_code"))
    what = "table address" if L.table is not None else "output code"
    shift = f" * 2^{m}" if m else ""
    levels.append(Level("clamp", n, f"layer {n}: {what} (index{shift} clamped to {L.index_min}..{L.index_max})", words))
    if L.table is not None:
        codes = []
        for j, addr in enumerate(words):
            entries = L.table[addr.lo : addr.hi + 1]
            codes.append(Sig(f"{pre}_n{j}_code", L.out_bits, L.out_signed, int(entries.min()), int(entries.max()),
                             "rom", (addr, n)))  # fmt: skip
        levels.append(Level("table", n, f"layer {n}: {L.activation} table ({L.table.size} words)", codes))
        words = codes
    levels[-1].layer_end = True
    return words


def _decision_levels(design: Design, codes: list[Sig], levels: list[Level]) -> tuple[list[Sig], Sig]:
    nb = design.decision_bits
    if len(codes) == 1:
        (c,) = codes
        assert design.threshold_code is not None
        t = int(design.threshold_code)
        if c.lo >= t or c.hi < t:
            always = int(c.lo >= t)
            dec = Sig("decision", 1, False, always, always, "const", (always,))
        else:
            dec = Sig("decision", 1, False, 0, 1, "ge", (c, t))
        outs = [_pass(c, "out_code0")]
        levels.append(Level("decision", 0, f"decision: code >= {t}", outs + [dec]))
        return outs, dec
    # argmax as a tournament: the left (lower) index wins ties, so the lowest index wins
    cand = [(c, Sig(f"am0_i{j}", nb, False, j, j, "const", (j,))) for j, c in enumerate(codes)]
    passing = codes
    depth = 0
    while len(cand) > 1:
        depth += 1
        new = []
        for e in range(0, len(cand), 2):
            if e + 1 < len(cand):
                (ca, ia), (cb, ib) = cand[e], cand[e + 1]
                c = Sig(f"am{depth}_c{e // 2}", ca.width, ca.signed, max(ca.lo, cb.lo), max(ca.hi, cb.hi),
                        "maxcode", (ca, cb))  # fmt: skip
                i = Sig(f"am{depth}_i{e // 2}", nb, False, min(ia.lo, ib.lo), max(ia.hi, ib.hi), "maxidx",
                        (ca, ia, cb, ib))  # fmt: skip
            else:
                ca, ia = cand[e]
                c, i = _pass(ca, f"am{depth}_c{e // 2}"), _pass(ia, f"am{depth}_i{e // 2}")
            new.append((c, i))
        cand = new
        last = len(cand) == 1
        passing = [_pass(p, f"out_code{j}" if last else f"am{depth}_code{j}") for j, p in enumerate(passing)]
        # the last level needs only the winner's index (its code is one of out_codes already)
        sigs = passing + ([cand[0][1]] if last else [s for pair in cand for s in pair])
        levels.append(Level("decision", 0, f"decision: argmax, level {depth}", sigs))
    return passing, cand[0][1]


def build_levels(design: Design, products: str = "multiply") -> tuple[list[Level], list[Sig], Sig]:
    """The datapath's levels, the output code signals and the decision signal.

    ``products``: ``"multiply"`` (one constant multiplication per weight) or ``"shift-add"``
    (one shifted input per nonzero canonical-signed-digit of the weight, summed by the adder tree).
    """
    levels: list[Level] = []
    ib = design.input_bits
    ports = [Sig(f"in_x{i}", ib, False, 0, (1 << ib) - 1, "port", (i,)) for i in range(design.n_inputs)]
    levels.append(Level("input", 0, "inputs", ports))
    sigs = ports
    for L in design.layers:
        sigs = _layer_levels(L, sigs, levels, products)
    codes, dec = _decision_levels(design, sigs, levels)
    for li, lev in enumerate(levels):
        for s in lev.sigs:
            s.level = li
    return levels, codes, dec


def wrap_to(v: int, w: int) -> int:
    """``v`` modulo ``2^w`` as a signed ``w``-bit value (a constant in modulo-``2^w`` arithmetic)."""
    return ((v + (1 << (w - 1))) % (1 << w)) - (1 << (w - 1))


def round_bits(w: int, k: int, n: int) -> tuple[int, int, int]:
    """For ``R(src / 2^k)`` of a ``w``-bit source into ``n`` bits: ``(ke, q_msb, q_lsb)``.

    ``ke = min(k, w + 1)`` gives the same result as ``k`` for every ``w``-bit value
    (beyond ``w + 1`` no tie is possible and every mode gives 0 or the floor's -1);
    bit ``b`` of the source extended without end is bit ``min(b, w - 1)``. The
    floor of the quotient is bits ``q_msb..q_lsb`` (sign-extended to ``n`` bits).
    """
    ke = min(k, w + 1)
    q_lsb = min(ke, w - 1)
    q_msb = min(w - 1, ke + n - 1)
    return ke, q_msb, q_lsb
