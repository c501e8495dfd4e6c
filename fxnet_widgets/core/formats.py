"""Rounding, overflow and fixed-point formats: the one place they are written.

Every rounding and overflow operation of the package goes through this module.
The names follow ``semantics.md``:

rounding modes
    ``floor`` (toward -inf, an arithmetic right shift), ``trunc`` (toward 0),
    ``half-up`` (ties toward +inf), ``half-away`` (ties away from 0),
    ``half-even`` (ties to even, convergent rounding).
overflow modes
    ``wrap`` (two's complement modulo 2^width) and ``saturate`` (clamp).

Examples
--------
>>> import numpy as np
>>> round_float(np.array([2.5, -2.5]), "half-even").tolist()
[2.0, -2.0]
>>> shift_round(np.array([-5]), 1, "floor").tolist()
[-3]
>>> wrap(np.array([128]), 8).tolist()
[-128]
>>> q_notation(10, 5)
'Q4.5 (10 b)'
"""

from __future__ import annotations

from typing import Final

import numpy as np

ROUNDINGS: Final = ("floor", "trunc", "half-up", "half-away", "half-even")
OVERFLOWS: Final = ("wrap", "saturate")

__all__ = [
    "ROUNDINGS",
    "OVERFLOWS",
    "check_rounding",
    "check_overflow",
    "round_float",
    "round_scalar",
    "shift_round",
    "wrap",
    "saturate",
    "signed_range",
    "unsigned_range",
    "bits_for_range",
    "q_notation",
    "round_to_codes",
]


def check_rounding(mode: object, what: str = "rounding") -> str:
    """Return ``mode`` if it is one of :data:`ROUNDINGS`, else raise."""
    if not isinstance(mode, str):
        raise TypeError(f"{what} must be a string, not {mode!r}")
    if mode not in ROUNDINGS:
        raise ValueError(f"{what} must be one of {', '.join(ROUNDINGS)}, not {mode!r}")
    return mode


def check_overflow(mode: object, what: str = "overflow") -> str:
    """Return ``mode`` if it is one of :data:`OVERFLOWS`, else raise."""
    if not isinstance(mode, str):
        raise TypeError(f"{what} must be a string, not {mode!r}")
    if mode not in OVERFLOWS:
        raise ValueError(f"{what} must be one of {', '.join(OVERFLOWS)}, not {mode!r}")
    return mode


def round_float(x: np.ndarray, mode: str) -> np.ndarray:
    """Round float64 values to integers (still float64) with ``mode``.

    Exact for every finite float64: the fraction is taken as ``x - floor(x)``,
    which is exact, so no ``x + 0.5`` is ever formed (that sum is inexact
    near 2^52).
    """
    x = np.asarray(x, dtype=np.float64)
    check_rounding(mode)
    if mode == "half-even":
        return np.rint(x)
    if mode == "floor":
        return np.floor(x)
    if mode == "trunc":
        return np.trunc(x)
    fl = np.floor(x)
    frac = x - fl
    if mode == "half-up":
        return fl + (frac >= 0.5)
    # half-away
    up = (frac > 0.5) | ((frac == 0.5) & (x > 0))
    return fl + up


def round_scalar(x: float, mode: str) -> int:
    """Round one finite float to a Python int with ``mode`` (exact)."""
    return int(round_float(np.array([x]), mode)[0])


def shift_round(s: np.ndarray, k: int, mode: str) -> np.ndarray:
    """Round ``s / 2**k`` to an integer with ``mode``; int64 in, int64 out.

    For ``k <= 0`` this is an exact left shift (the caller must have made sure
    the result fits). For ``k >= 63`` the result equals the one for 63 on any
    value whose magnitude is at most 2^61 (every accumulator value).
    """
    s = np.asarray(s, dtype=np.int64)
    check_rounding(mode)
    if k <= 0:
        return s << np.int64(-k)
    k = min(int(k), 63)
    kk = np.int64(k)
    if mode == "floor":
        return s >> kk
    mask = np.int64((1 << k) - 1)
    half = np.int64(1 << (k - 1))
    if mode == "trunc":
        return (s + ((s >> np.int64(63)) & mask)) >> kk
    if mode == "half-up":
        return (s + half) >> kk
    if mode == "half-away":
        neg = s < 0
        mag = (np.abs(s) + half) >> kk
        return np.where(neg, -mag, mag)
    # half-even
    q = s >> kk
    r = s & mask
    up = (r > half) | ((r == half) & ((q & np.int64(1)) == 1))
    return q + up


def signed_range(width: int) -> tuple[int, int]:
    """Range of a two's-complement code of ``width`` bits."""
    return -(1 << (width - 1)), (1 << (width - 1)) - 1


def unsigned_range(width: int) -> tuple[int, int]:
    """Range of an unsigned code of ``width`` bits."""
    return 0, (1 << width) - 1


def wrap(s: np.ndarray, width: int) -> np.ndarray:
    """Two's-complement wrap of int64 values to ``width`` bits (1..63)."""
    s = np.asarray(s, dtype=np.int64)
    lo = np.int64(-(1 << (width - 1)))
    mask = np.int64((1 << width) - 1)
    return ((s - lo) & mask) + lo


def saturate(s: np.ndarray, width: int) -> np.ndarray:
    """Clamp int64 values to the signed ``width``-bit range."""
    lo, hi = signed_range(width)
    return np.clip(np.asarray(s, dtype=np.int64), lo, hi)


def bits_for_range(lo: int, hi: int) -> int:
    """Smallest signed width that holds every integer in ``[lo, hi]``.

    >>> bits_for_range(-97920, 97155)
    18
    >>> bits_for_range(-2, -2)  # two's complement: 2 bits hold -2..1
    2
    """
    lo, hi = int(lo), int(hi)
    need = max(hi.bit_length() if hi > 0 else 0, (-lo - 1).bit_length() if lo < 0 else 0)
    return need + 1


def q_notation(width: int, frac: int, signed: bool = True) -> str:
    """Q notation with the width, e.g. ``Q4.5 (10 b)`` or ``UQ0.8 (8 b)``.

    m counts integer bits excluding the sign (see ``semantics.md``).
    """
    m = width - frac - (1 if signed else 0)
    return f"{'Q' if signed else 'UQ'}{m}.{frac} ({width} b)"


def round_to_codes(
    values: np.ndarray,
    width: int,
    frac: int,
    *,
    rounding: str = "half-even",
    overflow: str = "saturate",
    signed: bool = True,
) -> np.ndarray:
    """Quantise real values to ``width``-bit codes with ``frac`` fraction bits.

    ``code = overflow(round(value * 2**frac))``. Returns int64 codes.

    >>> round_to_codes(np.array([7.97]), 8, 4, overflow="wrap").tolist()
    [-128]
    """
    check_overflow(overflow)
    x = round_float(np.ldexp(np.asarray(values, dtype=np.float64), frac), rounding)
    if not np.all(np.isfinite(x)):
        raise ValueError("values must be finite")
    if signed:
        lo, hi = signed_range(width)
    else:
        lo, hi = unsigned_range(width)
    if overflow == "saturate":
        return np.clip(x, lo, hi).astype(np.int64)
    # wrap: exact in int64 when it fits, else exactly with Python ints
    if x.size == 0 or float(np.max(np.abs(x))) < 2.0**62:
        return wrap(x.astype(np.int64), width) if signed else (x.astype(np.int64) & hi)
    flat = [int(v) for v in x.ravel()]
    if signed:
        out = [((v - lo) % (1 << width)) + lo for v in flat]
    else:
        out = [v % (1 << width) for v in flat]
    return np.array(out, dtype=np.int64).reshape(x.shape)
