"""Constants of a :class:`~._design.Design` as a VHDL-2008 package, a Verilog-2005
include and a C header.

The three files hold the same names with the same values (prefix ``FXNET_``):
scalars (counts, widths, shifts, ranges, modes, file names), the integer
weights and biases of each layer, and each table as a constant array (VHDL, C;
Verilog reads the table's ``$readmemh`` image instead). Words are written as
two's-complement bit patterns of their exact width, so no tool has to infer a
width or a sign.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence

import numpy as np

from ..formats import ROUNDINGS
from ._design import PREFIX, VHDL_PACKAGE, Design, LayerDesign, vector_file
from ._memh import bit_patterns, hex_digits

__all__ = ["scalars", "vhdl_package", "verilog_include", "c_header"]

Scalar = tuple[str, bool | int | str, str]  # (name, value, comment)


def _round_name(mode: str) -> str:
    return "ROUND_" + mode.upper().replace("-", "_")


def scalars(design: Design, n_vectors: int | None) -> list[Scalar]:
    """Every scalar constant, in file order: ``(name, int | bool | str, comment)``."""
    P = PREFIX
    out: list[Scalar] = [
        (f"{P}_N_LAYERS", len(design.layers), "number of layers"),
        (f"{P}_N_INPUTS", design.n_inputs, "inputs of layer 1"),
        (f"{P}_INPUT_BITS", design.input_bits, "unsigned input codes"),
        (f"{P}_INPUT_FRAC", design.input_frac, "fraction bits of the inputs"),
    ]
    for i, (ident, name) in enumerate(zip(design.input_ids, design.input_names)):
        out.append((f"{P}_IN_{ident}", i, f"index of input {name!r}"))
    out.append((f"{P}_N_OUTPUTS", design.n_outputs, "outputs of the last layer"))
    out.append((f"{P}_DECISION_BITS", design.decision_bits, "width of a decision word"))
    if design.threshold_word is not None:
        out.append(
            (
                f"{P}_THRESHOLD_CODE",
                design.threshold_word,
                f"decision 1 iff output code >= this (threshold {design.threshold!r})",
            )
        )
    for i, (ident, name) in enumerate(zip(design.class_ids, design.classes)):
        out.append((f"{P}_CLASS_{ident}", i, f"decision value of class {name!r}"))
    for i, mode in enumerate(ROUNDINGS):
        out.append((f"{P}_{_round_name(mode)}", i, f"index rounding code of {mode}"))
    if n_vectors is not None:
        out.append((f"{P}_N_VECTORS", n_vectors, "golden vectors"))
        out.append((f"{P}_VECTORS_INPUTS_FILE", vector_file("inputs"), "N x N_INPUTS input words"))
        out.append((f"{P}_VECTORS_DECISIONS_FILE", vector_file("decisions"), "N decision words"))
    for L in design.layers:
        out.extend(_layer_scalars(L, n_vectors))
    return out


def _layer_scalars(L: LayerDesign, n_vectors: int | None) -> Iterator[Scalar]:
    n = f"{PREFIX}_{L.name}"
    yield (f"{n}_N_IN", L.n_in, f"layer {L.number} ({L.activation}) inputs")
    yield (f"{n}_N_OUT", L.n_out, "neurons")
    yield (f"{n}_WEIGHT_BITS", L.weight_bits, "signed weight words")
    yield (f"{n}_WEIGHT_FRAC", L.weight_frac, "fraction bits of the weights")
    yield (f"{n}_ACC_BITS", L.acc_bits, "signed accumulator (and bias) words")
    yield (f"{n}_ACC_FRAC", L.acc_frac, "fraction bits of the accumulator")
    yield (f"{n}_ACC_SATURATE", L.acc_overflow == "saturate", "accumulator overflow: saturate (else wrap)")
    yield (f"{n}_SHIFT", L.shift, "index = round(acc / 2**SHIFT); a negative SHIFT is a left shift")
    yield (f"{n}_INDEX_ROUND", L.index_round_code, f"rounding of the shift: {L.index_round}")
    yield (f"{n}_INDEX_MIN", L.index_min, "the index is clamped to INDEX_MIN..INDEX_MAX")
    yield (f"{n}_INDEX_MAX", L.index_max, "")
    yield (f"{n}_HAS_TABLE", L.table is not None, "table look-up (else the clamped index is the output)")
    if L.table is not None:
        assert L.table_bits is not None and L.table_file is not None
        yield (f"{n}_TABLE_BITS", L.table_bits, "table address bits; address = index - INDEX_MIN")
        assert L.table_frac is not None
        yield (f"{n}_TABLE_FRAC", L.table_frac, "fraction bits of the table index")
        yield (f"{n}_TABLE_FILE", L.table_file, "$readmemh image of the table")
    yield (f"{n}_OUT_BITS", L.out_bits, "output code words")
    yield (f"{n}_OUT_FRAC", L.out_frac, "fraction bits of the outputs")
    yield (f"{n}_OUT_SIGNED", L.out_signed, "output codes are signed (else unsigned)")
    yield (f"{n}_OUT_MIN", L.out_min, "")
    yield (f"{n}_OUT_MAX", L.out_max, "")
    if n_vectors is not None:
        yield (f"{n}_VECTORS_ACC_FILE", vector_file(f"layer{L.number}_acc"), "N x N_OUT accumulator words")
        yield (f"{n}_VECTORS_CODES_FILE", vector_file(f"layer{L.number}_codes"), "N x N_OUT output words")


def _chunks(items: Sequence[str], n: int = 8) -> list[list[str]]:
    return [list(items[i : i + n]) for i in range(0, len(items), n)]


def _patterns(values: np.ndarray, width: int) -> list[int]:
    return [int(v) for v in bit_patterns(values, width).tolist()]


# ---------------------------------------------------------------------------------
# VHDL-2008 (IEEE 1076-2008)
def _vhdl_array(name: str, type_name: str, values: np.ndarray, width: int, comment: str) -> str:
    d = hex_digits(width)
    lits = [f'{width}X"{p:0{d}X}"' for p in _patterns(values, width)]
    head = f"  -- {comment}\n  constant {name} : {type_name}(0 to {len(lits) - 1})({width - 1} downto 0) := "
    if len(lits) == 1:
        return head + f"(0 => {lits[0]});\n"
    rows = [", ".join(r) for r in _chunks(lits)]
    return head + "(\n    " + ",\n    ".join(rows) + "\n  );\n"


def vhdl_package(design: Design, n_vectors: int | None, banner: Sequence[str]) -> str:
    """The VHDL-2008 package ``fxnet_design_pkg`` (numeric_std words)."""
    lines = [f"-- {b}" for b in banner]
    lines += [
        "library ieee;",
        "use ieee.std_logic_1164.all;",
        "use ieee.numeric_std.all;",
        "",
        f"package {VHDL_PACKAGE} is",
        "  -- arrays of words (VHDL-2008 unconstrained element subtypes)",
        "  type fxnet_signed_array is array (natural range <>) of signed;",
        "  type fxnet_unsigned_array is array (natural range <>) of unsigned;",
        "",
    ]
    for name, value, comment in scalars(design, n_vectors):
        c = f"  -- {comment}" if comment else ""
        if isinstance(value, bool):
            lines.append(f"  constant {name} : boolean := {'true' if value else 'false'};{c}")
        elif isinstance(value, str):
            lines.append(f'  constant {name} : string := "{value}";{c}')
        else:
            kind = "integer" if name.endswith(("_FRAC", "_SHIFT", "_MIN", "_MAX", "_CODE")) else "natural"
            lines.append(f"  constant {name} : {kind} := {int(value)};{c}")
    text = "\n".join(lines) + "\n\n"
    for L in design.layers:
        n = f"{PREFIX}_{L.name}"
        text += _vhdl_array(
            f"{n}_WEIGHTS", "fxnet_signed_array", L.weights.ravel(), L.weight_bits,
            f"layer {L.number}: weight of neuron j, input i at index j * {n}_N_IN + i",
        )  # fmt: skip
        text += _vhdl_array(f"{n}_BIASES", "fxnet_signed_array", L.biases, L.acc_bits, f"layer {L.number}: biases")
        if L.table is not None:
            kind = "fxnet_signed_array" if L.out_signed else "fxnet_unsigned_array"
            text += _vhdl_array(
                f"{n}_TABLE", kind, L.table, L.out_bits,
                f"layer {L.number}: {L.activation} table, address = index - {n}_INDEX_MIN",
            )  # fmt: skip
        text += "\n"
    return text + f"end package {VHDL_PACKAGE};\n"


# ---------------------------------------------------------------------------------
# Verilog-2005 (IEEE 1364-2005)
def _verilog_packed(name: str, values: np.ndarray, width: int, comment: str) -> str:
    d = hex_digits(width)
    pats = _patterns(values, width)
    lits = [f"{width}'h{p:0{d}x}" for p in reversed(pats)]
    rows = [", ".join(r) for r in _chunks(lits)]
    return f"// {comment}\nlocalparam [{len(pats) * width - 1}:0] {name} = {{\n  " + ",\n  ".join(rows) + "\n};\n"


def verilog_include(design: Design, n_vectors: int | None, banner: Sequence[str]) -> str:
    """The Verilog-2005 include: ``localparam`` constants (include it inside a module)."""
    lines = [f"// {b}" for b in banner]
    lines += [
        '// Include inside a module: `include "fxnet_design.vh" (no include guard, so',
        "// several modules may include it). Words are two's-complement bit patterns;",
        "// packed arrays hold element e at bits [e*WIDTH +: WIDTH] (a part-select is",
        "// unsigned: wrap it in $signed() to read a signed word).",
        "",
    ]
    for name, value, comment in scalars(design, n_vectors):
        c = f"  // {comment}" if comment else ""
        if isinstance(value, bool):
            lines.append(f"localparam integer {name} = {int(value)};{c}")
        elif isinstance(value, str):
            lines.append(f'localparam {name} = "{value}";{c}')
        else:
            lines.append(f"localparam integer {name} = {int(value)};{c}")
    text = "\n".join(lines) + "\n\n"
    for L in design.layers:
        n = f"{PREFIX}_{L.name}"
        text += _verilog_packed(
            f"{n}_WEIGHTS", L.weights.ravel(), L.weight_bits,
            f"layer {L.number}: weight of neuron j, input i at element j * {n}_N_IN + i",
        )  # fmt: skip
        text += _verilog_packed(f"{n}_BIASES", L.biases, L.acc_bits, f"layer {L.number}: bias of neuron j at element j")
        d_w, d_b = hex_digits(L.weight_bits), hex_digits(L.acc_bits)
        for j in range(L.n_out):
            for i in range(L.n_in):
                p = _patterns(L.weights[j, i : i + 1], L.weight_bits)[0]
                text += (
                    f"localparam signed [{L.weight_bits - 1}:0] {n}_W_N{j}_I{i} = "
                    f"{L.weight_bits}'sh{p:0{d_w}x};  // {int(L.weights[j, i])}\n"
                )
            p = _patterns(L.biases[j : j + 1], L.acc_bits)[0]
            text += (
                f"localparam signed [{L.acc_bits - 1}:0] {n}_B_N{j} = "
                f"{L.acc_bits}'sh{p:0{d_b}x};  // {int(L.biases[j])}\n"
            )
        text += "\n"
    return text


# ---------------------------------------------------------------------------------
# C (ISO/IEC 9899:1999 and later, <stdint.h>)
def _c_type(width: int, signed: bool) -> str:
    for w in (8, 16, 32, 64):
        if width <= w:
            return f"{'' if signed else 'u'}int{w}_t"
    raise ValueError(f"width must be at most 64, not {width}")


def _c_int(v: int) -> str:
    if -(1 << 31) <= v < (1 << 31):
        return str(v)
    return f"INT64_C({v})"


def c_header(design: Design, n_vectors: int | None, banner: Sequence[str]) -> str:
    """The C header: ``#define`` scalars and ``static const`` arrays (``<stdint.h>`` types)."""
    guard = f"{PREFIX}_DESIGN_H"
    lines = [f"/* {b} */" for b in banner]
    lines += [f"#ifndef {guard}", f"#define {guard}", "", "#include <stdint.h>", ""]
    for name, value, comment in scalars(design, n_vectors):
        c = f"  /* {comment} */" if comment else ""
        if isinstance(value, bool):
            lines.append(f"#define {name} {int(value)}{c}")
        elif isinstance(value, str):
            lines.append(f'#define {name} "{value}"{c}')
        else:
            v = int(value)
            lines.append(f"#define {name} {'(' + str(v) + ')' if v < 0 else v}{c}")
    lines.append("")
    for L in design.layers:
        n = f"{PREFIX}_{L.name}"
        rows = ["{" + ", ".join(_c_int(int(v)) for v in row) + "}" for row in L.weights.tolist()]
        lines.append(f"/* layer {L.number}: weights [neuron][input] */")
        lines.append(
            f"static const {_c_type(L.weight_bits, True)} {n}_WEIGHTS[{L.n_out}][{L.n_in}] = {{\n  "
            + ",\n  ".join(rows) + "\n};"
        )  # fmt: skip
        lines.append(
            f"static const {_c_type(L.acc_bits, True)} {n}_BIASES[{L.n_out}] = "
            "{" + ", ".join(_c_int(int(v)) for v in L.biases.tolist()) + "};"
        )
        if L.table is not None:
            words = [str(int(v)) for v in L.table.tolist()]
            body = ",\n  ".join(", ".join(r) for r in _chunks(words, 16))
            lines.append(f"/* layer {L.number}: {L.activation} table, address = index - {n}_INDEX_MIN */")
            lines.append(
                f"static const {_c_type(L.out_bits, L.out_signed)} {n}_TABLE[{len(words)}] = {{\n  {body}\n}};"
            )
        lines.append("")
    lines.append(f"#endif /* {guard} */")
    return "\n".join(lines) + "\n"
