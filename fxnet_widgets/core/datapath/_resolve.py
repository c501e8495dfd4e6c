"""The levels with their cuts fixed: which signals exist, what names they read, which bits are used.

A ``pass`` signal at a level without a register bank is only another name for
its source; :meth:`Resolved.target` follows such names to the signal that is
declared. With the cuts known, :class:`Resolved` records which bits of every
declared signal something reads (an output port, a register, an operation),
so the writers can name the bits nothing needs.
"""

from __future__ import annotations

from ..export._design import Design
from ._graph import Level, Sig, round_bits

__all__ = ["Resolved"]


class Resolved:
    """Levels, output signals and cuts of one datapath (``cuts``: level indices followed by registers)."""

    def __init__(self, design: Design, levels: list[Level], codes: list[Sig], decision: Sig, cuts: set[int],
                 clock_mhz: float) -> None:  # fmt: skip
        self.design, self.levels, self.codes, self.decision = design, levels, codes, decision
        self.cuts = frozenset(cuts)
        self.clock_mhz = clock_mhz
        # constants read bit by bit (a neuron whose sum is its bias alone) get a name
        self.named: set[Sig] = set()
        for lev in levels:
            for s in lev.sigs:
                if s.op in ("round", "wrap"):
                    self.named.update(t for t in map(self.target, (a for a in s.args if isinstance(a, Sig)))
                                      if t.op == "const")  # fmt: skip
        for lev in levels:
            for s in lev.sigs:
                s.used = set()
        self._mark()

    def target(self, s: Sig) -> Sig:
        """The declared signal (or the constant) whose name ``s`` reads."""
        while s.op == "pass":
            src = s.args[0]
            root = src
            while root.op == "pass":
                root = root.args[0]
            if s.level in self.cuts and root.op != "const":
                break
            s = src
        return s

    def declared(self, s: Sig) -> bool:
        """``s`` is a wire or register of its own (a constant only where bits of it are selected)."""
        return self.target(s) is s and (s.op != "const" or s in self.named)

    def is_const(self, s: Sig) -> bool:
        """``s`` is a constant that is written as a literal where it is used."""
        t = self.target(s)
        return t.op == "const" and t not in self.named

    def registered(self, s: Sig) -> bool:
        return s.level in self.cuts

    def stage_titles(self) -> list[str]:
        """What each register bank holds, in order."""
        return [self.levels[i].title for i in sorted(self.cuts)]

    def _mark(self) -> None:
        for c in [*self.codes, self.decision]:
            t = self.target(c)
            t.use(t.width - 1)
        for lev in reversed(self.levels):
            for s in lev.sigs:
                if not self.declared(s):
                    continue
                srcs = [self.target(a) for a in s.args if isinstance(a, Sig)]
                if s.op in ("pass", "mul", "add"):
                    for src in srcs:  # fitted to the result's width: sign-extended, or its low bits
                        src.use(min(src.width, s.width) - 1)
                elif s.op == "wrap":
                    srcs[0].use(s.args[1] - 1)
                elif s.op == "round":
                    _round_use(srcs[0], s.args[1], s.args[2], s.width)
                elif s.op in ("sat", "clamp"):
                    _clamp_use(s, srcs[0])
                else:  # compared or looked up in full
                    for src in srcs:
                        src.use(src.width - 1)

    def unused_bits(self) -> list[tuple[str, int, int]]:
        """``(name, msb, lsb)`` of every run of bits of a declared signal that nothing reads."""
        out = []
        for lev in self.levels:
            for s in lev.sigs:
                if not self.declared(s) or len(s.used) == s.width:
                    continue
                b = 0
                while b < s.width:
                    if b in s.used:
                        b += 1
                        continue
                    e = b
                    while e + 1 < s.width and e + 1 not in s.used:
                        e += 1
                    out.append((s.name, e, b))
                    b = e + 1
        return out


def _clamp_use(s: Sig, src: Sig) -> None:
    """A clamp reads all of its source where it compares, else only the bits it keeps."""
    if s.op == "sat":
        hi = (1 << (s.args[1] - 1)) - 1
        lo, keep = -hi - 1, s.width
    else:
        m, ilo, ihi = s.args[1], s.args[2], s.args[3]
        lo, hi, keep = -((-ilo) >> m), ihi >> m, s.width - m
    if src.lo < lo or src.hi > hi:
        src.use(src.width - 1)
    elif keep > 0:
        src.use(min(src.width, keep) - 1)


def _round_use(src: Sig, k: int, mode: str, n: int) -> None:
    w = src.width
    ke, q_msb, q_lsb = round_bits(w, k, n)
    src.use(q_msb, q_lsb)
    if q_msb - q_lsb + 1 < n:
        src.use(w - 1, w - 1)  # the sign extends the quotient
    if mode in ("trunc", "half-away"):
        src.use(w - 1, w - 1)  # the sign
    if mode == "floor":
        return
    if mode == "trunc":
        src.use(min(ke - 1, w - 1))  # any bit below the quotient
        return
    src.use(min(ke - 1, w - 1), min(ke - 1, w - 1))  # the half bit
    if mode in ("half-even", "half-away") and ke >= 2:
        src.use(min(ke - 2, w - 1))  # the bits below it (a tie or not)
    if mode == "half-even":
        src.use(min(ke, w - 1), min(ke, w - 1))  # the quotient's lowest bit (odd or even)
