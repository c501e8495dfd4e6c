"""An independent, deliberately slow reference of the contract (``semantics.md``).

Written from the contract's text with Python ints and ``fractions.Fraction``
(exact rationals, Python standard library) and no code of the package's kernel:
every rounding is done on exact rationals, every shift on Python ints (whose
``>>`` is floor division by 2**k: Python docs, "Bitwise operations on integer
types"). The activation itself is evaluated with numpy in float64, as the
contract says table entries are.
"""

from __future__ import annotations

import math
from fractions import Fraction

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


def clamp(v: int, lo: int, hi: int) -> int:
    return lo if v < lo else hi if v > hi else v


def srange(w: int) -> tuple[int, int]:
    return -(1 << (w - 1)), (1 << (w - 1)) - 1


def act(x: float, a: str) -> float:
    v = np.float64(x)
    if a == "sigmoid":
        return float(1.0 / (1.0 + np.exp(-v))) if v >= 0 else float(np.exp(v) / (1.0 + np.exp(v)))
    if a == "tanh":
        return float(np.tanh(v))
    if a == "relu":
        return float(max(v, 0.0))
    return float(v)


def mid_t(a: int, k: int, mode: str, ft: int) -> Fraction:
    """Midpoint of all integers s with R(s / 2**k) == a, over 2**(k + ft)."""
    # search a window around a * 2**k for the set (exact, by brute force)
    step = 1 << k
    lo = a * step - step
    hi = a * step + step
    members = [s for s in range(lo, hi + 1) if rnd(Fraction(s, step), mode) == a]
    return Fraction(members[0] + members[-1], 2) / (1 << (k + ft)) if k + ft >= 0 else Fraction(
        members[0] + members[-1], 2
    ) * (1 << -(k + ft))


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
                        v = act(float(t), a_name)
                        entry_cache[idx] = clamp(rnd(Fraction(v) * Fraction(2) ** fo, tr), olo, ohi)
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
