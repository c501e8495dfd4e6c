"""Canonical signed digit (CSD) recoding of integer constants.

The CSD form of an integer writes it with digits in {-1, 0, 1} such that no two
adjacent digits are nonzero. It is unique and has the fewest nonzero digits of
any signed-digit form (Reitwiesner 1960). A multiplication by a constant then
costs one adder or subtractor per nonzero digit beyond the first.

Examples
--------
>>> csd(7)
[1, 0, 0, -1]
>>> csd_string(23)
'10(-1)00(-1)'
>>> csd_string(15, frac=5)
'0.1000(-1)'
>>> csd_adders(7)
1
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["csd", "csd_string", "csd_nonzero", "csd_adders"]


def _as_int(n: Any, what: str = "n") -> int:
    if isinstance(n, (bool, np.bool_)) or not isinstance(n, (int, np.integer)):
        raise TypeError(f"{what} must be an integer, not {n!r}")
    return int(n)


def csd(n: int) -> list[int]:
    """CSD digits of the integer ``n``, most significant first.

    Recoding (Reitwiesner): while ``n`` is nonzero, an odd ``n`` gives the digit
    ``d = 2 - (n mod 4)`` (so ``+1`` or ``-1``) and ``n -= d``; an even ``n``
    gives ``0``; then ``n //= 2``. Negative numbers give the negated digits of
    ``-n``. ``csd(0) == [0]``.

    >>> csd(-7)
    [-1, 0, 0, 1]
    """
    n = _as_int(n)
    if n == 0:
        return [0]
    digits: list[int] = []
    while n != 0:
        if n & 1:
            d = 2 - (n & 3)
            n -= d
        else:
            d = 0
        digits.append(d)
        n >>= 1
    return digits[::-1]


def csd_nonzero(n: int) -> int:
    """Number of nonzero CSD digits of ``n`` (``popcount(n XOR 3n)`` for ``n >= 0``)."""
    n = abs(_as_int(n))
    return bin(n ^ (3 * n)).count("1")


def csd_adders(n: int) -> int:
    """Adders/subtractors of a multiplier by the constant ``n``: ``max(nonzero digits - 1, 0)``.

    A zero or a power of two (up to sign) costs no adder: it is a wire and a shift.
    """
    return max(csd_nonzero(n) - 1, 0)


def csd_string(n: int, frac: int = 0) -> str:
    """CSD digits as text, ``(-1)`` for a minus digit, with ``frac`` digits after a point.

    The value shown is ``n / 2**frac``.

    >>> csd_string(-3)
    '(-1)01'
    """
    n = _as_int(n)
    frac = _as_int(frac, "frac")
    if frac < 0:
        raise ValueError(f"frac must be at least 0, not {frac!r}")
    digits = csd(n)
    if frac:
        digits = [0] * max(frac + 1 - len(digits), 0) + digits
    text = ["(-1)" if d < 0 else str(d) for d in digits]
    if frac:
        text.insert(len(text) - frac, ".")
    return "".join(text)
