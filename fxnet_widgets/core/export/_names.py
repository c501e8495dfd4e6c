"""Identifiers that are valid, and mean the same thing, in VHDL, Verilog and C.

The rules are the intersection of the three languages:

* letters, digits and single underscores only; starts with a letter; no
  leading, trailing or doubled underscore (VHDL basic identifier, IEEE 1076-2008
  section 15.4.2);
* VHDL does not tell case apart, so two names that differ only in case are the
  same name: every identifier is upper case, and uniqueness is checked on it;
* no reserved word of VHDL-2008, Verilog-2005 (IEEE 1364-2005 annex B) or C
  (ISO/IEC 9899:2018 section 6.4.1, plus the C23 additions), compared without
  case (VHDL's rule).

>>> sanitise("red")
'RED'
>>> sanitise("ripe  fruit!")
'RIPE_FRUIT'
>>> sanitise("3d"), sanitise("signal"), sanitise("")
('N_3D', 'SIGNAL_ID', 'ID')
>>> unique_identifiers(["Red", "red", "RED"])
['RED', 'RED_2', 'RED_3']
"""

from __future__ import annotations

import re
from collections.abc import Iterable

__all__ = ["KEYWORDS", "sanitise", "unique_identifiers", "is_identifier"]

_VHDL = """
abs access after alias all and architecture array assert assume assume_guarantee attribute
begin block body buffer bus case component configuration constant context cover default
disconnect downto else elsif end entity exit fairness file for force function generate
generic group guarded if impure in inertial inout is label library linkage literal loop map
mod nand new next nor not null of on open or others out package parameter port postponed
procedure process property protected pure range record register reject release rem report
restrict restrict_guarantee return rol ror select sequence severity shared signal sla sll sra
srl strong subtype then to transport type unaffected units until use variable vmode vprop vunit
wait when while with xnor xor
"""
_VERILOG = """
always and assign automatic begin buf bufif0 bufif1 case casex casez cell cmos config deassign
default defparam design disable edge else end endcase endconfig endfunction endgenerate
endmodule endprimitive endspecify endtable endtask event for force forever fork function
generate genvar highz0 highz1 if ifnone incdir include initial inout input instance integer
join large liblist library localparam macromodule medium module nand negedge nmos nor
noshowcancelled not notif0 notif1 or output parameter pmos posedge primitive pull0 pull1
pulldown pullup pulsestyle_ondetect pulsestyle_onevent rcmos real realtime reg release repeat
rnmos rpmos rtran rtranif0 rtranif1 scalared showcancelled signed small specify specparam
strong0 strong1 supply0 supply1 table task time tran tranif0 tranif1 tri tri0 tri1 triand
trior trireg unsigned use uwire vectored wait wand weak0 weak1 while wire wor xnor xor
"""
_C = """
auto break case char const continue default do double else enum extern float for goto if inline
int long register restrict return short signed sizeof static struct switch typedef union
unsigned void volatile while _alignas _alignof _atomic _bool _complex _generic _imaginary
_noreturn _static_assert _thread_local alignas alignof bool constexpr false nullptr
static_assert thread_local true typeof typeof_unqual _bitint _decimal128 _decimal32 _decimal64
"""
#: reserved words of the three languages (lower case; compared without case)
KEYWORDS: frozenset[str] = frozenset((_VHDL + _VERILOG + _C).split())

_VALID = re.compile(r"^[A-Z](?:_?[A-Z0-9])*$")


def is_identifier(name: str) -> bool:
    """True if ``name`` is upper case, well formed and no keyword of the three languages."""
    return bool(_VALID.match(name)) and name.lower() not in KEYWORDS


def sanitise(name: str) -> str:
    """An upper-case identifier valid in VHDL, Verilog and C, made from ``name``.

    Characters other than ASCII letters and digits become one underscore; a
    name that starts with a digit gets ``N_`` in front; an empty name becomes
    ``ID``; a keyword gets ``_ID`` behind.
    """
    if not isinstance(name, str):
        raise TypeError(f"name must be a string, not {name!r}")
    text = re.sub(r"[^A-Za-z0-9]+", "_", name).strip("_").upper()
    if not text:
        text = "ID"
    if text[0].isdigit():
        text = "N_" + text
    if text.lower() in KEYWORDS:
        text += "_ID"
    assert is_identifier(text), text
    return text


def unique_identifiers(names: Iterable[str]) -> list[str]:
    """Sanitised identifiers of ``names``, made unique (``_2``, ``_3``... behind repeats)."""
    out: list[str] = []
    taken: set[str] = set()
    for name in names:
        base = sanitise(name)
        ident, n = base, 1
        while ident in taken:
            n += 1
            ident = f"{base}_{n}"
        taken.add(ident)
        out.append(ident)
    return out
