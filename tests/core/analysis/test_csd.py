"""Canonical signed digit recoding against textbook examples and brute force."""

import numpy as np
import pytest

from fxnet_widgets.core.analysis import csd, csd_adders, csd_nonzero, csd_string


def _value(digits):
    v = 0
    for d in digits:
        v = 2 * v + d
    return v


def test_worked_examples_wanhammar():
    # Wanhammar, DSP Integrated Circuits, 11.3.2: 7 = 100(-1), 23 = 10(-1)00(-1), 15/32 = 0.1000(-1)
    assert csd(7) == [1, 0, 0, -1]
    assert csd_string(7) == "100(-1)"
    assert csd(23) == [1, 0, -1, 0, 0, -1]
    assert csd_string(23) == "10(-1)00(-1)"
    assert csd_string(15, frac=5) == "0.1000(-1)"


def test_small_cases_by_hand():
    # by hand: 0 is the single digit 0; -7 = -(8 - 1); 1/8 = 0.001
    assert csd(0) == [0] and csd_adders(0) == 0
    assert csd(-7) == [-1, 0, 0, 1]
    assert csd_string(1, frac=3) == "0.001"
    # a constant multiplier costs (nonzero digits - 1) adders (Parhi, VLSI DSP Systems, 13.6)
    assert csd_adders(7) == 1 and csd_adders(23) == 2 and csd_adders(64) == 0 and csd_adders(-5) == 1


def test_all_12_bit_values_minimal_and_non_adjacent_by_brute_force():
    # Reitwiesner 1960: the CSD form is the unique signed-digit form with no two adjacent
    # nonzero digits, and it has the fewest nonzero digits. Brute force: every signed-digit
    # vector of 14 digits in {-1, 0, 1} (3**14 of them) covers every 12-bit value.
    n_digits = 14
    vals = np.zeros(1, dtype=np.int64)
    weight = np.zeros(1, dtype=np.int64)
    adjacent = np.zeros(1, dtype=bool)
    last = np.zeros(1, dtype=bool)
    for pos in range(n_digits):
        d = np.array([-1, 0, 1], dtype=np.int64)
        vals = (vals[:, None] + d[None, :] * (1 << pos)).ravel()
        weight = (weight[:, None] + (d != 0)[None, :]).ravel()
        nz = np.broadcast_to((d != 0)[None, :], (last.size, 3))
        adjacent = (adjacent[:, None] | (last[:, None] & nz)).ravel()
        last = nz.ravel().copy()
    span = 1 << n_digits
    best = np.full(2 * span, 99, dtype=np.int64)
    np.minimum.at(best, vals + span, weight)
    naf_count = np.bincount(vals[~adjacent] + span, minlength=2 * span)
    for n in range(-4095, 4096):
        digits = csd(n)
        assert _value(digits) == n
        assert all(not (a and b) for a, b in zip(digits, digits[1:]))
        nz = sum(1 for d in digits if d)
        assert nz == best[n + span] == csd_nonzero(n)
        assert naf_count[n + span] == 1  # unique among non-adjacent forms


def test_average_nonzero_digits_of_signed_16_bit_integers():
    # exact enumeration against n/3 + 1/9 - (1/9)(-1/2)^n for n = 16 (references.md; 5.44444)
    counts = [csd_nonzero(n) for n in range(-(1 << 15), 1 << 15)]
    mean = sum(counts) / len(counts)
    formula = 16 / 3 + 1 / 9 - (1 / 9) * (-0.5) ** 16
    assert mean == pytest.approx(formula, abs=1e-12)
    assert round(mean, 5) == 5.44444


def test_bad_input_messages():
    with pytest.raises(TypeError, match=r"^n must be an integer, not 1\.5$"):
        csd(1.5)
    with pytest.raises(TypeError, match=r"^n must be an integer, not True$"):
        csd_adders(True)
    with pytest.raises(ValueError, match=r"^frac must be at least 0, not -1$"):
        csd_string(3, frac=-1)
