"""An independent, deliberately slow reference of the contract (``semantics.md``).

Written from the contract's text with Python ints and ``fractions.Fraction``
(exact rationals, Python standard library) and no code of the package's kernel:
every rounding is done on exact rationals, every shift on Python ints (whose
``>>`` is floor division by 2**k: Python docs, "Bitwise operations on integer
types"). Table entries are rounded from the exact value (contract step 6), here with
mpmath at 50 digits (mpmath docs: arbitrary-precision ``mpf`` with an unbounded
exponent), written without any code of the package's table builder.
"""

from __future__ import annotations

import math
from fractions import Fraction

import mpmath
import numpy as np


def rnd(x: Fraction, mode: str) -> int:
    """Round an exact rational to an integer (IEEE 754-2019 4.3 names mapped)."""
    fl = math.floor(x)
    frac = x - fl
    if mode == "floor":  # roundTowardNegative
        return fl
    if mode == "trunc":  # roundTowardZero
        return fl if x >= 0 else math.ceil(x)
    if mode == "half-up":  # ties toward +inf
        return fl + (1 if frac >= Fraction(1, 2) else 0)
    if mode == "half-away":  # roundTiesToAway
        if frac == Fraction(1, 2):
            return fl + 1 if x > 0 else fl
        return fl + (1 if frac > Fraction(1, 2) else 0)
    if mode == "half-even":  # roundTiesToEven
        if frac == Fraction(1, 2):
            return fl + (fl % 2)
        return fl + (1 if frac > Fraction(1, 2) else 0)
    raise ValueError(mode)


def rnd_dyadic(n: int, e: int, mode: str) -> int:
    """Round n / 2**e (e >= 0) to an integer, with Python ints only (same modes as rnd)."""
    if e == 0:
        return n
    fl = n >> e  # floor division by 2**e (Python docs, "Bitwise operations on integer types")
    rest, half = n - (fl << e), 1 << (e - 1)
    if mode == "floor":
        return fl
    if mode == "trunc":
        return fl + (1 if n < 0 and rest else 0)
    if rest != half:
        return fl + (1 if rest > half else 0)
    return {"half-up": fl + 1, "half-away": fl + (1 if n > 0 else 0), "half-even": fl + (fl & 1)}[mode]


def clamp(v: int, lo: int, hi: int) -> int:
    return lo if v < lo else hi if v > hi else v


def srange(w: int) -> tuple[int, int]:
    return -(1 << (w - 1)), (1 << (w - 1)) - 1


def table_entry(a: str, t: Fraction, fo: int, mode: str) -> int:
    """R(f(t) * 2**fo) of the exact value (unclamped), f = sigmoid or tanh.

    t = 0 is exact (e^0 = 1: sigmoid 1/2, tanh 0). Otherwise f(t) = B + S * c, with B an
    exact integer and c > 0 computed at 50 digits without cancellation (c = 1/(1 + e^|t|)
    for sigmoid, 2/(1 + e^2|t|) for tanh, or tanh itself near 0); the true value lies within
    c * 2^-150 (about 10^-45) of the computed one, and the entry is returned when both ends
    of that interval round alike (as exact dyadic rationals N / 2^E, with Python ints).
    """
    if t == 0:
        return rnd(Fraction(2) ** fo / 2 if a == "sigmoid" else Fraction(0), mode)
    sgn = 1 if t > 0 else -1
    with mpmath.workdps(50):
        x = abs(mpmath.mpf(t.numerator) / t.denominator)
        if a == "sigmoid":
            c = 1 / (1 + mpmath.exp(x))  # 1 - sigmoid(x) = sigmoid(-x)
            base, s = (1, -1) if sgn > 0 else (0, 1)
        elif x < 1:
            c = mpmath.tanh(x)
            base, s = 0, sgn
        else:
            c = 2 / (1 + mpmath.exp(2 * x))  # 1 - tanh(x)
            base, s = sgn, -sgn
        if x > 4096:
            # c < 2 e^-4096 < 2^-5900: below 2^-42, every c rounds alike, since |fo| <= 40 puts
            # B * 2^fo on a multiple of 2^-40 and every boundary on a multiple of 1/2
            c = mpmath.mpf(2) ** -200
        man, ex = c.man_exp  # c = man * 2**ex exactly (mpmath docs, "mpf.man_exp")
    man, ex = int(man), int(ex)
    e = max(0, -fo, 150 - ex - fo)
    nb = base << (fo + e)
    ends = [rnd_dyadic(nb + s * ((man * ((1 << 150) + d)) << (ex + fo - 150 + e)), e, mode) for d in (-1, 1)]
    assert ends[0] == ends[1], f"reference cannot decide the entry at t = {t}"
    return ends[0]


def mid_t(a: int, k: int, mode: str, ft: int) -> Fraction:
    """Midpoint of all integers s with R(s / 2**k) == a, over 2**(k + ft).

    R(s / 2**k) grows with s, so the smallest and largest such s are found by bisection
    (exact, with Python ints) in the window a * 2**k +- (2**k + 1).
    """
    step = 1 << k

    def first(pred, lo: int, hi: int) -> int:  # smallest s in [lo, hi] with pred(s), pred monotone
        while lo < hi:
            m = (lo + hi) // 2
            if pred(m):
                hi = m
            else:
                lo = m + 1
        return lo

    lo, hi = a * step - step - 1, a * step + step + 1
    s0 = first(lambda s: rnd_dyadic(s, k, mode) >= a, lo, hi)
    s1 = first(lambda s: rnd_dyadic(s, k, mode) > a, lo, hi) - 1
    return Fraction(s0 + s1, 2) / Fraction(2) ** (k + ft)


def run(doc_net: dict, doc_plan: dict, codes: list[list[int]]) -> dict:
    """Run the contract on Python ints. Returns per-layer acc, codes, events, decisions."""
    bits = doc_net["input"].get("bits", 8)
    scale = doc_net["input"].get("scale", "pow2")
    fi = bits
    layers_out = []
    u = [list(map(int, row)) for row in codes]
    for li, (L, P) in enumerate(zip(doc_net["layers"], doc_plan["layers"])):
        a_name = L["activation"]
        ww, fw = P["weight_bits"], P["weight_frac"]
        wr = P.get("weight_round", "half-even")
        A = P["acc_bits"]
        ov = P.get("acc_overflow", "wrap")
        ir = P.get("index_round", "floor")
        bo = P["out_bits"]
        tr = P.get("table_round", "half-even")
        sample = P.get("table_sample", "edge")
        fo = P.get("out_frac")
        if fo is None:
            fo = bo if a_name == "sigmoid" else bo - 1
        if a_name in ("sigmoid", "relu"):
            olo, ohi = 0, (1 << bo) - 1
        else:
            olo, ohi = srange(bo)
        wlo, whi = srange(ww)
        alo, ahi = srange(A)
        qw, clips = [], []
        for row in L["weights"]:
            qrow, c = [], 0
            for w in row:
                wf = Fraction(w)
                if li == 0 and scale == "full":
                    wf = Fraction(float(np.float64(w) * (2.0**bits / (2.0**bits - 1))))
                v = rnd(wf * Fraction(2) ** fw, wr)
                if v < wlo or v > whi:
                    c += 1
                qrow.append(clamp(v, wlo, whi))
            qw.append(qrow)
            clips.append(c)
        qb = [clamp(rnd(Fraction(b) * Fraction(2) ** (fi + fw), wr), alo, ahi) for b in L["bias"]]
        if a_name in ("sigmoid", "tanh"):
            T, ft = P["table_bits"], P["table_frac"]
            k = fi + fw - ft
            ilo, ihi = srange(T)
        else:
            k = fi + fw - fo
            ilo, ihi = olo, ohi
            T = ft = None
        accs, outs = [], []
        ev = {"acc_overflow": [0] * len(qw), "table_low": [0] * len(qw), "table_high": [0] * len(qw)}
        entry_cache: dict[int, int] = {}
        for x in u:
            arow, orow = [], []
            for j, qrow in enumerate(qw):
                s = qb[j] + sum(q * xi for q, xi in zip(qrow, x))
                if s < alo or s > ahi:
                    ev["acc_overflow"][j] += 1
                    if ov == "wrap":
                        s_a = ((s - alo) % (1 << A)) + alo
                    else:
                        s_a = clamp(s, alo, ahi)
                else:
                    s_a = s
                if k >= 0:
                    idx = rnd(Fraction(s_a, 1 << k), ir)
                else:
                    idx = s_a * (1 << -k)
                if idx < ilo:
                    ev["table_low"][j] += 1
                elif idx > ihi:
                    ev["table_high"][j] += 1
                idx = clamp(idx, ilo, ihi)
                if T is None:
                    code = idx
                else:
                    if idx not in entry_cache:
                        if sample == "mid" and k >= 1:
                            t = mid_t(idx, k, ir, ft)
                        else:
                            t = Fraction(idx) / Fraction(2) ** ft
                        entry_cache[idx] = clamp(table_entry(a_name, t, fo, tr), olo, ohi)
                    code = entry_cache[idx]
                arow.append(s_a)
                orow.append(code)
            accs.append(arow)
            outs.append(orow)
        layers_out.append({"acc": accs, "codes": outs, "events": ev, "weight_clip": clips, "q_w": qw, "q_b": qb})
        u = outs
        fi = fo
    last = layers_out[-1]["codes"]
    thr = doc_net.get("output", {}).get("threshold", 0.5)
    if len(last[0]) == 1:
        tc = math.ceil(Fraction(thr) * Fraction(2) ** fi)
        dec = [int(r[0] >= tc) for r in last]
    else:
        dec = [max(range(len(r)), key=lambda i: (r[i], -i)) for r in last]
    return {"layers": layers_out, "decisions": dec}
