"""Activation tables against an exact outside reference (contract step 6).

The reference is ``fxref.table_entry``: mpmath at 50 digits (mpmath docs), written
without the package's table builder. Every table is built through ``build_integer_network``, the
path the exports, golden vectors and widgets read.
"""

from __future__ import annotations

import fxref
import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core import kernel
from fxnet_widgets.core.formats import ROUNDINGS
from fxnet_widgets.core.kernel import tables as kernel_tables

pytest.importorskip("mpmath")


def _layer(activation: str, input_bits: int = 8, **fields):
    net = fw.Network.from_layers([([[1.0]], [0.0], activation)], input_bits=input_bits)
    plan_fields = dict(weight_bits=8, weight_frac=4, acc_bits=40, table_bits=8, table_frac=4, out_bits=8)
    plan_fields.update(fields)
    return kernel.build_integer_network(net, fw.Plan.uniform(net, **plan_fields)).layers[0]


def _reference(L) -> list[int]:
    """Every entry of a layer's table from the reference, in address order."""
    p = L.plan
    k = L.shift
    out = []
    for a in range(L.index_min, L.index_max + 1):
        if p.table_sample == "mid" and k >= 1:
            t = fxref.mid_t(a, k, p.index_round, p.table_frac)
        else:
            t = fxref.Fraction(a) / fxref.Fraction(2) ** p.table_frac
        out.append(fxref.clamp(fxref.table_entry(L.activation, t, L.out_frac, p.table_round), L.out_min, L.out_max))
    return out


def _random_layers(n: int, seed: int):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        act = str(rng.choice(["sigmoid", "tanh"]))
        bits = int(rng.integers(1, 17))
        out_bits = int(rng.integers(1, 17))
        table_bits = int(rng.integers(1, 9))
        fields = dict(
            weight_frac=int(rng.integers(-8, 20)),
            table_bits=table_bits,
            # negative fractions reach far into the saturated tails (|t| up to 2**(T-1-Ft))
            table_frac=int(rng.integers(-6, 16)),
            out_bits=out_bits,
            # negative and above the output width, and the default
            out_frac=None if rng.random() < 0.2 else int(rng.integers(-6, out_bits + 7)),
            table_round=str(rng.choice(ROUNDINGS)),
            index_round=str(rng.choice(ROUNDINGS)),
            table_sample=str(rng.choice(["edge", "mid"])),
        )
        yield _layer(act, input_bits=bits, **fields)


def test_random_plans_whole_tables_equal_the_exact_reference():
    # 300 random plans, every entry of every table (reference: mpmath at 50 digits)
    seen_k = set()
    for L in _random_layers(300, seed=22):
        seen_k.add((L.plan.table_sample, L.shift >= 1))
        assert L.table.tolist() == _reference(L), L.describe() + f" {L.plan!r}"
    assert seen_k == {("edge", True), ("edge", False), ("mid", True), ("mid", False)}


@pytest.mark.parametrize("mode", ["floor", "trunc"])
def test_saturated_tanh_tail_lies_below_full_scale(mode):
    # The case: tanh, 9-bit output with 7 fraction bits. tanh(t) < 1 for every finite t
    # (mathematics), so 128 * tanh(t) < 128 and floor/trunc give 127 all along the upper tail;
    # float64 tanh returns exactly 1.0 there (IEEE 754 binary64: 1 - 2e^-2t rounds to 1 beyond t ~ 19).
    L = _layer("tanh", table_bits=9, table_frac=2, out_bits=9, out_frac=7, table_round=mode)
    t_top = (L.index_max) / 4
    assert np.tanh(t_top) == 1.0  # the float64 trap the guard closes
    assert L.table[-1] == 127 and L.table[-200:].tolist() == [127] * 200
    assert L.table.tolist() == _reference(L)
    # the lower tail: 128 * tanh(t) lies a hair above -128, so floor gives -128 and trunc -127
    assert L.table[0] == (-128 if mode == "floor" else -127)


def test_saturated_sigmoid_tails():
    # sigmoid(t) < 1 for every finite t: with Fo = 8, floor gives 255 at the top, half-even 256
    # (clamped to the 9-bit range it still fits); far below, sigmoid > 0, so floor 0 and
    # trunc 0, and the value never reaches half an LSB there: half-up 0 too
    for mode, top in (("floor", 255), ("trunc", 255), ("half-even", 256), ("half-up", 256)):
        L = _layer("sigmoid", table_bits=10, table_frac=0, out_bits=9, out_frac=8, table_round=mode)
        assert L.table[-1] == top and L.table[0] == 0, mode
        assert L.table.tolist() == _reference(L)


def test_extreme_inputs_and_fractions():
    # |t| up to 2**19 * 2**40: the tail is decided by sign alone (tanh(t) < 1, sigmoid(t) > 0)
    L = _layer("tanh", table_bits=20, table_frac=-40, out_bits=16, out_frac=15, table_round="floor")
    assert L.table[-1] == 32767 and L.table[0] == -32768 and L.table[1 << 19] == 0
    L = _layer("sigmoid", table_bits=20, table_frac=-40, out_bits=16, out_frac=40, table_round="trunc")
    assert L.table[-1] == 65535 and L.table[0] == 0  # clamped: 2**40 * sigmoid is far above 65535
    L = _layer("sigmoid", table_bits=3, table_frac=-40, out_bits=4, out_frac=-40, table_round="half-up")
    assert L.table.tolist() == [0] * 8  # 0 < sigmoid < 1: every value below 2**-40 rounds to 0
    # tiny t (Ft = 40): sigmoid(t) = 1/2 + t/4 - t^3/48 + ... (Taylor series), a hair below the next
    # integer when 2**16 * t / 4 is one: checked against the reference around those addresses
    L = _layer("sigmoid", table_bits=20, table_frac=32, weight_frac=40, out_bits=16, out_frac=16, table_round="floor")
    p = L.plan
    for a in (1 << 18, (1 << 18) - 1, (1 << 18) + 1, -(1 << 18), 3 << 16):
        want = fxref.clamp(fxref.table_entry("sigmoid", fxref.mid_t(a, L.shift, p.index_round, p.table_frac)
                                             if p.table_sample == "mid" else fxref.Fraction(a, 1 << 32),
                                             16, "floor"), 0, 65535)  # fmt: skip
        assert L.table[a - L.index_min] == want
    assert L.table[(1 << 18) - L.index_min] == 32768  # 65536 * sigmoid(2**-14) = 32769 - 3e-10


@pytest.mark.parametrize("mode", ROUNDINGS)
def test_t_zero_is_the_exact_boundary(mode):
    # sigmoid(0) = 1/2 and tanh(0) = 0 exactly (e^0 = 1). With Fo = 0 the sigmoid entry is the tie
    # 1/2 itself: floor, trunc, half-even give 0, half-up and half-away give 1 (the modes' definitions).
    tie = {"floor": 0, "trunc": 0, "half-even": 0, "half-up": 1, "half-away": 1}[mode]
    L = _layer("sigmoid", out_bits=4, out_frac=0, table_round=mode)
    assert L.table[-L.index_min] == tie
    # Fo = -1: 1/4 rounds to 0 in every mode; Fo = 8: 128 exactly
    assert _layer("sigmoid", out_bits=4, out_frac=-1, table_round=mode).table[128] == 0
    assert _layer("sigmoid", out_bits=9, out_frac=8, table_round=mode).table[128] == 128
    # tanh(0) = 0 sits on an integer boundary: every mode gives 0 (floor would give -1 for any
    # value a hair below)
    assert _layer("tanh", out_bits=8, table_round=mode).table[128] == 0


def _perturbed(direction):
    real = kernel_tables.float_activation

    def f(t, activation):
        v = real(t, activation)
        if direction == "random":  # each entry one ulp up or down, as another libm or SIMD path may
            up = np.random.default_rng(len(v)).random(v.shape) < 0.5
            return np.where(up, np.nextafter(v, np.inf), np.nextafter(v, -np.inf))
        return np.nextafter(v, direction * np.inf)

    return f


@pytest.mark.parametrize("direction", [1, -1, "random"])
def test_one_ulp_of_float64_changes_no_table(monkeypatch, direction):
    # another CPU's tanh/exp differ by an ulp (the issue measured it on ~10 % of arguments):
    # every table must stay the same
    def all_tables():
        kernel.clear_caches()
        tables = [L.table.tolist() for L in _random_layers(150, seed=7)]
        for mode in ROUNDINGS:
            tables.append(_layer("sigmoid", out_bits=4, out_frac=0, table_round=mode).table.tolist())
            tables.append(_layer("tanh", table_bits=9, table_frac=2, out_bits=9, out_frac=7,
                                 table_round=mode).table.tolist())  # fmt: skip
        return tables

    want = all_tables()
    monkeypatch.setattr(kernel_tables, "float_activation", _perturbed(direction))
    got = all_tables()
    kernel.clear_caches()
    assert got == want


def test_guard_reevaluates_few_entries():
    # the demo-sized table: 16384 entries, most decided by float64; the saturated tails are filled
    # by monotonicity from a handful of exact evaluations
    L = _layer("sigmoid", table_bits=14, table_frac=9, out_bits=8, table_round="floor")
    p = L.plan
    spec = kernel_tables.TableSpec("sigmoid", 14, 9, L.shift, p.index_round, p.table_sample, L.out_frac,
                                   p.table_round, L.out_min, L.out_max)  # fmt: skip
    table, stats = kernel_tables.build_table_counted(spec)
    assert table.tolist() == L.table.tolist()  # the kernel's table is this builder's
    assert L.table.size == stats.entries == 16384
    assert 0 < stats.exact <= 64
    assert stats.guarded < stats.entries


def test_table_builder_rejects_other_activations():
    spec = kernel_tables.TableSpec("relu", 4, 0, 0, "floor", "edge", 4, "floor", 0, 15)
    with pytest.raises(ValueError, match=r"^table activation must be sigmoid or tanh, not 'relu'$"):
        kernel_tables.build_table(spec)


def test_exported_rom_images_equal_the_exact_reference(tmp_path):
    # the hand-off files carry the same tables: the failing case (tanh, 9-bit output with
    # 7 fraction bits, floor) and a saturated sigmoid, read back from the $readmemh images
    from fxnet_widgets.core.export import export, read_export

    net = fw.Network.from_layers([([[1.0], [-2.0]], [0.0, 0.5], "tanh"), ([[1.5, -1.0]], [0.0], "sigmoid")])
    plan = fw.Plan((
        fw.LayerPlan(weight_bits=8, weight_frac=4, acc_bits=20, table_bits=9, table_frac=2, out_bits=9, out_frac=7,
                     table_round="floor"),
        fw.LayerPlan(weight_bits=8, weight_frac=4, acc_bits=24, table_bits=8, table_frac=0, out_bits=8, out_frac=7,
                     table_round="trunc", table_sample="mid"),
    ))  # fmt: skip
    export(net, plan, tmp_path / "out")
    back = read_export(tmp_path / "out")
    for got, L in zip(back.layers, kernel.build_integer_network(net, plan).layers):
        assert np.asarray(got.table).tolist() == _reference(L)
