"""Where the pipeline registers go: a rough delay per level and the choice of cuts.

A *cut* after level ``i`` registers every signal of that level; the latency is
the number of cuts. ``pipeline="auto"`` cuts after the inputs, after every
layer's adder tree, at every layer boundary (so each table is a ROM with a
registered read, which synthesis can map to a block RAM) and after the
decision, and then adds cuts inside any stretch whose estimated delay exceeds
the clock period. ``pipeline=N`` places exactly ``N`` cuts so that the longest
estimated stretch is as short as possible.

The delays are a rough model of an iCE40 (LUT4 plus routing per logic level, a
ripple carry chain per adder or comparator), in nanoseconds: estimates to place
registers sensibly, not timing. Synthesis and place and route measure timing.
"""

from __future__ import annotations

from ._graph import Level, Sig

__all__ = ["DEFAULT_CLOCK_MHZ", "level_delay", "choose_cuts"]

#: 1280x720p60 pixel clock (CEA-861 / SMPTE 296M): 74.25 MHz
DEFAULT_CLOCK_MHZ = 74.25

# rough figures in ns for the slowest iCE40 family (UltraPlus), read off nextpnr-ice40's critical-path
# report of one generated datapath on an UP5K (LUT 1.2 + net 1.8; carry 0.3 per bit; clock to out 1.4 +
# setup 1.2); model only, so "auto" meets the clock on faster iCE40 parts with room to spare
_LOGIC = 3.0  # one LUT4 level with its routing
_CARRY = 0.3  # one bit of carry chain
_REGISTER = 2.6  # clock to out + setup of one register stage
_BRAM = 4.0  # block RAM address setup and clock to data out


def _adder(width: int) -> float:
    return _LOGIC + _CARRY * width


def _sig_delay(s: Sig, registered_rom: bool) -> float:
    op = s.op
    if op in ("port", "pass", "const", "wrap"):
        return 0.0
    if op == "mul":
        w = abs(int(s.args[1]))
        ones = bin(w).count("1")
        if ones == 1 and s.args[1] > 0:
            return 0.0  # a power of two: wiring
        return _adder(s.width) * max(1, (ones - 1).bit_length() + (s.args[1] < 0))
    if op == "add":
        return _adder(s.width)
    if op in ("sat", "clamp"):
        return _adder(s.args[0].width) + _LOGIC
    if op == "round":
        return _adder(s.width) + (0.0 if s.args[2] == "floor" else _LOGIC)
    if op == "rom":
        bits = s.args[0].width
        return _BRAM if registered_rom else _LOGIC * max(1, (bits + 1) // 2)
    if op == "ge":
        return _adder(s.args[0].width + 1)
    if op in ("maxcode", "maxidx"):
        return _adder(s.args[0].width) + _LOGIC
    raise AssertionError(op)


def level_delay(level: Level, registered: bool) -> float:
    """Estimated delay (ns) of one level; ``registered``: a cut follows it."""
    return max((_sig_delay(s, registered) for s in level.sigs), default=0.0)


def _stretches(levels: list[Level], cuts: set[int]) -> list[float]:
    out, acc = [], 0.0
    for i, lev in enumerate(levels):
        acc += level_delay(lev, i in cuts)
        if i in cuts:
            out.append(acc)
            acc = 0.0
    out.append(acc)
    return out


def longest(levels: list[Level], cuts: set[int]) -> float:
    """The longest estimated register-to-register (or port) stretch, in ns, plus one register stage."""
    return max(_stretches(levels, cuts)) + (_REGISTER if cuts else 0.0)


def _auto(levels: list[Level], clock_mhz: float) -> set[int]:
    last = len(levels) - 1
    cuts = {0, last}
    for i, lev in enumerate(levels):
        if lev.sum_end or lev.layer_end:
            cuts.add(i)
    budget = 1000.0 / clock_mhz - _REGISTER
    acc = 0.0
    for i, lev in enumerate(levels):
        d = level_delay(lev, i in cuts)
        if acc > 0.0 and acc + d > budget and i - 1 not in cuts:
            cuts.add(i - 1)
            acc = 0.0
        acc += d
        if i in cuts:
            acc = 0.0
    return cuts


def _exact(levels: list[Level], n: int) -> set[int]:
    """``n`` cuts minimising the longest stretch (dynamic programming; ties: later cuts)."""
    m = len(levels)
    d = [level_delay(lev, False) for lev in levels]
    dr = [level_delay(lev, True) for lev in levels]
    if n == 0:
        return set()
    inf = float("inf")

    pre = [0.0]
    for v in d:
        pre.append(pre[-1] + v)

    def seg(a: int, b: int, cut_at_end: bool) -> float:  # levels a..b inclusive
        if a > b:
            return 0.0
        return pre[b] - pre[a] + (dr[b] if cut_at_end else d[b])

    # best[c][i]: minimal longest stretch of levels 0..i with c cuts, the last one after level i
    best = [[inf] * m for _ in range(n + 1)]
    back = [[-1] * m for _ in range(n + 1)]
    for i in range(m):
        best[1][i] = seg(0, i, True)
    for c in range(2, n + 1):
        for i in range(c - 1, m):
            for p in range(c - 2, i):
                v = max(best[c - 1][p], seg(p + 1, i, True))
                if v <= best[c][i]:
                    best[c][i], back[c][i] = v, p
    end, score = -1, inf
    for i in range(n - 1, m):
        v = max(best[n][i], seg(i + 1, m - 1, False))
        if v <= score:
            end, score = i, v
    cuts, c = set(), n
    while c >= 1:
        cuts.add(end)
        end, c = back[c][end], c - 1
    return cuts


def choose_cuts(levels: list[Level], pipeline: str | int, clock_mhz: float) -> set[int]:
    """The levels after which a register bank sits (``pipeline``: ``"auto"`` or a count)."""
    if pipeline == "auto":
        return _auto(levels, clock_mhz)
    assert isinstance(pipeline, int)
    return _exact(levels, pipeline)
