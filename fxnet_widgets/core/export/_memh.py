"""``$readmemh`` memory images (IEEE 1364-2005 section 17.2.9): write and read.

A word is written as its two's-complement bit pattern of ``width`` bits in
``ceil(width / 4)`` lower-case hex digits, one word per line, in address order,
after one ``//`` comment line that names the contents.

>>> text = memh_text(np.array([-1, 0, 3]), 4, "demo")
>>> text.splitlines()
['// demo', 'f', '0', '3']
>>> parse_memh(text, 4, signed=True, where="demo").tolist()
[-1, 0, 3]
"""

from __future__ import annotations

import re

import numpy as np

__all__ = ["hex_digits", "bit_patterns", "hex_lines", "memh_text", "parse_memh"]

_HEX = np.frombuffer(b"0123456789abcdef", dtype=np.uint8)


def hex_digits(width: int) -> int:
    """Hex digits of a ``width``-bit word: ``ceil(width / 4)``."""
    return (int(width) + 3) // 4


def bit_patterns(values: np.ndarray, width: int) -> np.ndarray:
    """Two's-complement bit patterns of ``values`` in ``width`` bits (1..63), as uint64.

    Raises ``ValueError`` if a value does not fit ``width`` bits signed or unsigned
    (the writer never wraps silently).
    """
    v = np.asarray(values, dtype=np.int64).ravel()
    if v.size:
        lo, hi = int(v.min()), int(v.max())
        if lo < -(1 << (width - 1)) or hi > (1 << width) - 1:
            bad = lo if lo < -(1 << (width - 1)) else hi
            raise ValueError(f"word must fit in {width} bits, not {bad}")
    return (v & np.int64((1 << width) - 1)).astype(np.uint64)


def hex_lines(values: np.ndarray, width: int) -> str:
    """One hex word per line (newline after each), vectorised."""
    pat = bit_patterns(values, width)
    d = hex_digits(width)
    shifts = (np.arange(d - 1, -1, -1, dtype=np.uint64) * np.uint64(4))[None, :]
    nibbles = (pat[:, None] >> shifts) & np.uint64(0xF)
    out = np.empty((pat.size, d + 1), dtype=np.uint8)
    out[:, :d] = _HEX[nibbles.astype(np.intp)]
    out[:, d] = ord("\n")
    return out.tobytes().decode("ascii")


def memh_text(values: np.ndarray, width: int, title: str) -> str:
    """A ``$readmemh`` file: a ``//`` comment line, then one word per line."""
    if "\n" in title or "\r" in title:
        raise ValueError(f"title must be one line, not {title!r}")
    return f"// {title}\n" + hex_lines(values, width)


_TOKEN = re.compile(r"@([0-9A-Fa-f]+)|([0-9A-Fa-f_xXzZ]+)|(\S)")


def parse_memh(text: str, width: int, *, signed: bool, where: str, words: int | None = None) -> np.ndarray:
    """Read a ``$readmemh`` text back into int64 values.

    Accepts ``//`` and ``/* */`` comments, white space and ``@hhhh`` addresses.
    ``x``/``z`` digits, words wider than ``width`` bits and addresses that leave
    gaps are errors naming ``where`` and the line.
    """
    text = re.sub(r"/\*.*?\*/", lambda m: "\n" * m.group(0).count("\n"), text, flags=re.S)
    values: dict[int, int] = {}
    addr = 0
    for lineno, line in enumerate(text.splitlines(), start=1):
        line = line.split("//", 1)[0]
        for m in _TOKEN.finditer(line):
            if m.group(1) is not None:
                addr = int(m.group(1), 16)
                continue
            tok = m.group(2)
            if tok is None or re.search(r"[xXzZ]", tok):
                bad = tok if tok is not None else m.group(3)
                raise ValueError(f"{where}: line {lineno}: word must be hex digits, not {bad!r}")
            v = int(tok.replace("_", ""), 16)
            if v >> width:
                raise ValueError(f"{where}: line {lineno}: word must fit in {width} bits, not {tok!r}")
            if signed and v >> (width - 1):
                v -= 1 << width
            values[addr] = v
            addr += 1
    n = (max(values) + 1) if values else 0
    if words is not None and n != words:
        raise ValueError(f"{where}: must hold {words} words, not {n}")
    if len(values) != n:
        missing = next(a for a in range(n) if a not in values)
        raise ValueError(f"{where}: address {missing:#x} has no word")
    return np.array([values[a] for a in range(n)], dtype=np.int64)
