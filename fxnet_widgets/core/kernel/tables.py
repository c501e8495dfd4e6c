"""Activation tables rounded from the exact value (``semantics.md``, step 6).

The one table builder of the package: the kernel, the exports, the golden vectors,
the generated datapath and the widgets all read the tables it builds.

An entry is ``clamp(R_tab(f(t) * 2**Fo), out_min, out_max)`` of the **exact**
value, ``t`` an exact rational. Most entries are far from a rounding boundary, and
float64 decides them: its error (a few ulps, whichever libm or SIMD routine runs)
is far below the guard. The guard re-evaluates with :mod:`decimal` every entry
whose float64 scaled value ``y`` lies within ``2**-30 * |y|`` of a rounding
boundary of ``R_tab`` (an integer for ``floor``/``trunc``, a half-integer for the
``half-*`` modes), that saturates to 0 or +-1 in float64 (``|f| >= 1`` or below the smallest normal
number), or whose ``t`` is 0.

Entries grow with the address (``f`` increasing, ``t`` increasing, rounding and
clamp monotone), so a run of guarded entries whose two ends have equal exact
entries holds that entry throughout: a saturated tail costs a few exact
evaluations, not one per entry (the run is bisected where its ends differ).

Examples
--------
>>> spec = TableSpec("tanh", table_bits=9, table_frac=4, shift=0, index_round="floor",
...                  sample="edge", out_frac=7, table_round="floor", out_min=-256, out_max=255)
>>> table = build_table(spec)
>>> int(table[-1]), int(table[256])  # tanh(255/16) < 1, so floor gives 127; tanh(0) = 0
(127, 0)
"""

from __future__ import annotations

import decimal
from dataclasses import dataclass
from fractions import Fraction
from typing import Final

import numpy as np

from ..formats import check_rounding, round_float, signed_range

__all__ = ["GUARD", "TableSpec", "TableStats", "build_table", "build_table_counted", "exact_entry", "table_inputs",
           "table_t"]  # fmt: skip

#: relative distance to a rounding boundary below which float64 is not trusted (contract step 6)
GUARD: Final = 2.0**-30
#: digits of the decimal evaluation (contract step 6); raised where an entry needs more
DIGITS: Final = 40
#: beyond this |t| (2|t| for tanh) the tail is below 2**-1400 of full scale: evaluated there,
#: since every entry of such a tail rounds like full scale minus any value below 2**-42
#: (boundaries lie on multiples of 1/2 and full scale 2**Fo on a multiple of 2**-40)
_T_CAP: Final = 1000


@dataclass(frozen=True)
class TableSpec:
    """Everything a table depends on (a value: equal specs give equal tables)."""

    activation: str  # "sigmoid" or "tanh"
    table_bits: int
    table_frac: int
    shift: int  # k = Fi + Fw - Ft
    index_round: str
    sample: str  # "edge" or "mid"
    out_frac: int
    table_round: str
    out_min: int
    out_max: int

    @property
    def index_min(self) -> int:
        return signed_range(self.table_bits)[0]


@dataclass
class TableStats:
    """What one table build did (:func:`build_table_counted`; for benchmarks and tests)."""

    entries: int = 0
    guarded: int = 0  # entries the float64 evaluation could not decide
    exact: int = 0  # decimal evaluations actually made (runs are filled by monotonicity)


def table_t(spec: TableSpec, a: int) -> Fraction:
    """The exact input ``t`` of the entry for index ``a`` (step 6: ``edge`` or ``mid``)."""
    k = spec.shift
    if spec.sample == "edge" or k <= 0:
        return Fraction(a) / Fraction(2) ** spec.table_frac
    # mid: t = (a + d) / 2**Ft, d in units of 2**-(k+1) (half an s LSB is 2**-(k+1) index units)
    sgn = (a > 0) - (a < 0)
    d = {
        "floor": (1 << k) - 1,
        "trunc": sgn * ((1 << k) - 1),
        "half-up": -1,
        "half-away": -sgn,
        "half-even": 0,
    }[spec.index_round]
    return Fraction((a << (k + 1)) + d, 1 << (k + 1)) / Fraction(2) ** spec.table_frac


def table_inputs(n_entries: int, index_min: int, table_frac: int, k: int, index_round: str, sample: str) -> np.ndarray:
    """The real input ``t`` of every table entry, in address order (float64, nearest to the exact ``t``).

    ``edge``: ``t = a / 2**Ft``. ``mid``: the midpoint of the smallest and
    largest integer ``s_A`` that map to ``a`` (over all integers), over
    ``2**(Fi+Fw)``; equal to ``edge`` when ``k <= 0``.
    """
    a = np.arange(index_min, index_min + n_entries, dtype=np.float64)
    if sample == "edge" or k <= 0:
        return np.ldexp(a, -table_frac)
    h = 2.0 ** -(k + 1)  # half an s LSB, in index units
    if index_round == "floor":
        d = np.full_like(a, 0.5 - h)
    elif index_round == "trunc":
        d = np.sign(a) * (0.5 - h)
    elif index_round == "half-up":
        d = np.full_like(a, -h)
    elif index_round == "half-away":
        d = -np.sign(a) * h
    else:  # half-even: symmetric sets, midpoint exactly a * 2**k
        d = np.zeros_like(a)
    return np.ldexp(a + d, -table_frac)


def float_activation(t: np.ndarray, activation: str) -> np.ndarray:
    """``f(t)`` in float64 (numpy; its last bit may differ between CPUs, the guard covers it)."""
    if activation == "sigmoid":
        e = np.exp(-np.abs(t))
        return np.where(t >= 0, 1.0 / (1.0 + e), e / (1.0 + e))
    return np.tanh(t)


def _round_fraction(x: Fraction, mode: str) -> int:
    fl = x.numerator // x.denominator
    rest = x - fl
    if mode == "floor":
        return fl
    if mode == "trunc":
        return fl if x >= 0 or rest == 0 else fl + 1
    half = Fraction(1, 2)
    if rest != half:
        return fl + (rest > half)
    if mode == "half-up":
        return fl + 1
    if mode == "half-away":
        return fl + (x > 0)
    return fl + (fl & 1)  # half-even


def _tail(activation: str, x: Fraction, digits: int) -> tuple[int, decimal.Decimal]:
    """``f(x)`` for ``x > 0`` as ``B + m`` with ``B`` in {0, 1} and ``m`` (a Decimal, no
    cancellation) accurate to ``digits`` significant digits."""
    x = min(x, Fraction(_T_CAP))
    xd_digits = len(str(int(x))) + 1
    small = activation == "tanh" and x < Fraction(1, 2)
    lost = 0
    if small:  # 1 - e cancels about -log10(2x) digits
        lost = max(0, len(str(int(1 / (2 * x)))))
    with decimal.localcontext() as ctx:
        ctx.prec = digits + 10 + xd_digits + lost
        ctx.traps[decimal.Underflow] = False
        xd = decimal.Decimal(x.numerator) / decimal.Decimal(x.denominator)
        if activation == "sigmoid":  # sigmoid(x) = 1 - e/(1+e), e = exp(-x)
            e = (-xd).exp()
            return 1, -(e / (1 + e))
        e = (-2 * xd).exp()
        if small:  # tanh(x) = (1-e)/(1+e)
            return 0, (1 - e) / (1 + e)
        return 1, -(2 * e / (1 + e))  # tanh(x) = 1 - 2e/(1+e)


def exact_entry(activation: str, t: Fraction, out_frac: int, mode: str) -> int:
    """``R_tab(f(t) * 2**Fo)`` of the exact value (before the clamp), as a Python int.

    Evaluated with :mod:`decimal` at :data:`DIGITS` digits; the value is known to lie
    in a small interval around the decimal result, and the entry is returned once both
    ends of that interval round alike (more digits are used until they do; by the
    Lindemann-Weierstrass theorem ``f(t)`` is irrational for every rational ``t != 0``).
    """
    scale = Fraction(2) ** out_frac
    if t == 0:  # the only exact boundary: sigmoid(0) = 1/2, tanh(0) = 0
        return _round_fraction(scale / 2 if activation == "sigmoid" else Fraction(0), mode)
    sgn = 1 if t > 0 else -1
    digits = DIGITS
    while digits <= 40 * DIGITS:
        base, m = _tail(activation, abs(t), digits)
        # f(|t|) = base + m; f(-x) = 1 - f(x) for sigmoid, -f(x) for tanh
        mf = Fraction(m)
        if sgn < 0:  # sigmoid(-x) = 1 - sigmoid(x), tanh(-x) = -tanh(x)
            base, mf = (1 - base if activation == "sigmoid" else -base), -mf
        err = abs(mf) * Fraction(1, 10**digits)
        lo = (base + mf - err) * scale
        hi = (base + mf + err) * scale
        r_lo, r_hi = _round_fraction(lo, mode), _round_fraction(hi, mode)
        if r_lo == r_hi:
            return r_lo
        digits *= 2
    raise ArithmeticError(f"table entry at t = {t} must be decidable within {40 * DIGITS} digits")


def _guarded(y: np.ndarray, v: np.ndarray, t: np.ndarray, mode: str) -> np.ndarray:
    """Entries float64 cannot decide: near a boundary of ``mode``, saturated, or ``t = 0``."""
    # distance to the nearest boundary (an integer for floor/trunc, else a half-integer)
    d = np.rint(y) if mode in ("floor", "trunc") else np.floor(y) + 0.5
    d -= y
    np.abs(d, out=d)
    g = np.abs(y)
    g *= GUARD
    guard = d <= g  # also every y that underflowed to 0
    av = np.abs(v, out=g)
    guard |= av >= 1
    guard |= av < np.finfo(np.float64).tiny
    zero = int(np.searchsorted(t, 0.0))  # t grows with the address
    if zero < t.size and t[zero] == 0:
        guard[zero] = True
    return guard


def build_table(spec: TableSpec) -> np.ndarray:
    """The table of ``spec`` in address order (read-only int64), per contract step 6."""
    return build_table_counted(spec)[0]


def build_table_counted(spec: TableSpec) -> tuple[np.ndarray, TableStats]:
    """:func:`build_table`, and how many entries the guard decided and evaluated exactly."""
    if spec.activation not in ("sigmoid", "tanh"):
        raise ValueError(f"table activation must be sigmoid or tanh, not {spec.activation!r}")
    check_rounding(spec.table_round, "table_round")
    n = 1 << spec.table_bits
    ilo = spec.index_min
    t = table_inputs(n, ilo, spec.table_frac, spec.shift, spec.index_round, spec.sample)
    v = float_activation(t, spec.activation)
    with np.errstate(under="ignore"):  # |v| <= 1 and |Fo| <= 40: exact unless subnormal (then guarded or tiny)
        y = v * 2.0**spec.out_frac
    entries = round_float(y, spec.table_round)
    guard = _guarded(y, v, t, spec.table_round)
    stats = TableStats(entries=n, guarded=int(np.count_nonzero(guard)))
    if stats.guarded:
        exact: dict[int, int] = {}

        def entry(i: int) -> int:
            if i not in exact:
                stats.exact += 1
                exact[i] = exact_entry(spec.activation, table_t(spec, ilo + i), spec.out_frac, spec.table_round)
            return exact[i]

        # runs of guarded addresses: [starts[r], ends[r]] inclusive
        where = np.flatnonzero(guard)
        cut = np.flatnonzero(np.diff(where) != 1)
        starts = np.concatenate((where[:1], where[cut + 1]))
        ends = np.concatenate((where[cut], where[-1:]))
        for i0, i1 in zip(starts.tolist(), ends.tolist()):
            stack = [(i0, i1)]
            while stack:  # entries are monotone in the address: equal ends fill the run
                i, j = stack.pop()
                ei, ej = entry(i), entry(j)
                if ei == ej:
                    entries[i : j + 1] = ei
                elif j - i <= 1:
                    entries[i], entries[j] = ei, ej
                else:
                    m = (i + j) // 2
                    stack += [(i, m), (m, j)]
    table = np.clip(entries, spec.out_min, spec.out_max).astype(np.int64)
    table.setflags(write=False)
    return table, stats
