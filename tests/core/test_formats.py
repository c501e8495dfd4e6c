"""Rounding and overflow against hand-computed cases and two reference libraries."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from fxnet_widgets.core.formats import (
    ROUNDINGS,
    bits_for_range,
    q_notation,
    round_float,
    round_to_codes,
    shift_round,
    wrap,
)

# Hand-computed at (8 bits, 0 frac); the values are the worked examples and
# follow the IEEE 754-2019 section 4.3 definitions (half-even = roundTiesToEven,
# half-away = roundTiesToAway, floor = roundTowardNegative, trunc = roundTowardZero)
# and our half-up = ties toward +inf.
HAND = {
    2.5: {"half-even": 2, "half-up": 3, "half-away": 3, "floor": 2, "trunc": 2},
    -2.5: {"half-even": -2, "half-up": -2, "half-away": -3, "floor": -3, "trunc": -2},
}


@pytest.mark.parametrize("value", sorted(HAND))
@pytest.mark.parametrize("mode", ROUNDINGS)
def test_hand_computed_rounding(value, mode):
    assert round_to_codes(np.array([value]), 8, 0, rounding=mode).tolist() == [HAND[value][mode]]


def test_half_even_rounds_up_then_wraps():
    # 7.97 * 16 = 127.52 -> half-even 128 -> does not fit Q3.4 (8 b) -> wraps to -128
    # (two's-complement modulo 2^8; worked example of the issue, common practice)
    assert round_to_codes(np.array([7.97]), 8, 4, overflow="wrap").tolist() == [-128]
    assert round_to_codes(np.array([7.97]), 8, 4, overflow="saturate").tolist() == [127]


def test_numpy_round_agrees_with_half_even():
    # numpy docs, numpy.round Notes: 1.5 and 2.5 -> 2.0, -0.5 and 0.5 -> 0.0
    x = np.array([1.5, 2.5, -0.5, 0.5])
    assert round_float(x, "half-even").tolist() == np.round(x).tolist() == [2.0, 2.0, -0.0, 0.0]


def test_half_up_exact_near_2_pow_52():
    # x + 0.5 is inexact here (float spacing 1): 2^52 + 1 is an odd integer and must stay
    x = np.array([2.0**52 + 1, -(2.0**52) - 1])
    for mode in ROUNDINGS:
        assert round_float(x, mode).tolist() == x.tolist()


def test_arithmetic_shift_is_floor_division():
    # Python docs, stdtypes: (-5) >> 1 == -3; an arithmetic right shift by n is floor(x / 2^n)
    assert shift_round(np.array([-5]), 1, "floor").tolist() == [(-5) >> 1] == [-3]


@given(st.lists(st.integers(-(2**61), 2**61 - 1), min_size=1, max_size=50), st.integers(1, 80))
def test_shift_round_matches_exact_rationals(values, k):
    # reference: exact rationals (Python fractions) rounded per the IEEE 754 definitions
    from fractions import Fraction

    from fxref import rnd

    s = np.array(values, dtype=np.int64)
    for mode in ROUNDINGS:
        got = shift_round(s, k, mode).tolist()
        assert got == [rnd(Fraction(v, 1 << k), mode) for v in values], mode


def test_wrap_two_complement():
    # signed W-bit range -2^(W-1) .. 2^(W-1)-1 (references.md, two's complement)
    assert wrap(np.array([127, 128, 255, 256, -129]), 8).tolist() == [127, -128, -1, 0, 127]


def test_bits_for_range_worked_value():
    # references.md "Accumulator growth": 3 x uint8 x int8 spans -97920 .. 97155, i.e. 18 bits
    assert (3 * 255 * -128, 3 * 255 * 127) == (-97920, 97155)
    assert bits_for_range(-97920, 97155) == 18
    # Q15 in 16 bits: -32768 .. 32767 (Microchip Q15 format docs; CMSIS NN_Q15_MIN/MAX)
    assert bits_for_range(-32768, 32767) == 16
    assert bits_for_range(-32769, 0) == 17


def test_q_notation_excludes_sign():
    # references.md: Qm.n with m excluding the sign; Q15 = Q0.15 in 16 bits
    assert q_notation(16, 15) == "Q0.15 (16 b)"
    assert q_notation(10, 5) == "Q4.5 (10 b)"
    assert q_notation(8, 8, signed=False) == "UQ0.8 (8 b)"
    # Q15: 24576 stands for 0.75 (Microchip Q15 docs)
    assert round_to_codes(np.array([0.75, -1.0, 0.999969482]), 16, 15).tolist() == [24576, -32768, 32767]


# --- reference libraries -------------------------------------------------------------
RNG = np.random.default_rng(20261202)
VALUES = np.concatenate(
    [
        RNG.uniform(-20, 20, 60_000),
        np.round(RNG.uniform(-20, 20, 40_000) * 32) / 32 + 1 / 64,  # exact ties at (8, 5)
    ]
)


@pytest.mark.parametrize("overflow", ["wrap", "saturate"])
@pytest.mark.parametrize(
    "mode,fxp_mode",
    [("floor", "floor"), ("trunc", "trunc"), ("half-even", "around")],
)
def test_against_fxpmath(mode, fxp_mode, overflow):
    # fxpmath (PyPI) documentation: rounding 'floor' toward -inf, 'trunc'/'fix' toward 0,
    # 'around' ties to even (numpy.around); overflow 'wrap' / 'saturate' (its default is trunc+saturate)
    from fxpmath import Fxp

    ref = Fxp(VALUES, signed=True, n_word=10, n_frac=5, rounding=fxp_mode, overflow=overflow).val
    ours = round_to_codes(VALUES, 10, 5, rounding=mode, overflow=overflow)
    assert len(VALUES) >= 100_000
    np.testing.assert_array_equal(ours, np.asarray(ref, dtype=np.int64))


@pytest.mark.parametrize("overflow", ["wrap", "saturate"])
@pytest.mark.parametrize("mode", ROUNDINGS)
def test_against_apytypes(mode, overflow):
    # apytypes (PyPI) documentation: QuantizationMode TO_NEG (floor), TO_ZERO (trunc),
    # TIES_POS (half-up), TIES_AWAY, TIES_EVEN; OverflowMode WRAP / SAT. Its from_float always
    # rounds ties away and wraps, so convert exactly (60 fraction bits) then cast twice:
    # round_to_codes with the mode first, then apply the overflow at the target width.
    import apytypes as apy

    qm = {
        "floor": apy.QuantizationMode.TO_NEG,
        "trunc": apy.QuantizationMode.TO_ZERO,
        "half-up": apy.QuantizationMode.TIES_POS,
        "half-away": apy.QuantizationMode.TIES_AWAY,
        "half-even": apy.QuantizationMode.TIES_EVEN,
    }[mode]
    om = apy.OverflowMode.WRAP if overflow == "wrap" else apy.OverflowMode.SAT
    wide = apy.APyFixedArray.from_float(VALUES, int_bits=12, frac_bits=60)
    step = wide.cast(int_bits=12, frac_bits=5, quantization=qm, overflow=apy.OverflowMode.WRAP)
    final = step.cast(int_bits=5, frac_bits=5, quantization=apy.QuantizationMode.TO_NEG, overflow=om)
    ref = np.rint(np.asarray(final.to_numpy()) * 32).astype(np.int64)
    ours = round_to_codes(VALUES, 10, 5, rounding=mode, overflow=overflow)
    np.testing.assert_array_equal(ours, ref)


def test_bits_for_range_is_the_smallest_twos_complement_width():
    # definition of a w-bit two's-complement range, [-2^(w-1), 2^(w-1) - 1] (common practice); every
    # interval inside [-70, 70], all-negative and all-positive ones included
    from fxnet_widgets.core.formats import bits_for_range

    for lo in range(-70, 71):
        for hi in range(lo, 71):
            w = next(w for w in range(1, 10) if -(2 ** (w - 1)) <= lo and hi <= 2 ** (w - 1) - 1)
            assert bits_for_range(lo, hi) == w, (lo, hi)
