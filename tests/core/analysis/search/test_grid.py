"""Grid text and checks: one set of limits, the plan's."""

import pytest

from fxnet_widgets.core.analysis import parse_grid


def test_parse_grid():
    assert parse_grid("weight_frac=3:8,table_bits=8:14:3") == {
        "weight_frac": [3, 4, 5, 6, 7, 8], "table_bits": [8, 11, 14]}  # fmt: skip
    assert parse_grid(" out_bits=6|8 , acc_overflow=wrap|saturate") == {
        "out_bits": [6, 8], "acc_overflow": ["wrap", "saturate"]}  # fmt: skip
    with pytest.raises(ValueError, match=r"^grid field must be a plan key \(weight_bits, .*\), not 'bits'$"):
        parse_grid("bits=3:4")
    with pytest.raises(ValueError, match=r"^grid item must be FIELD=VALUES, not 'weight_frac'$"):
        parse_grid("weight_frac")
    msg = r"^grid values of table_bits must be A:B, A:B:STEP \(STEP > 0\) or V1\|V2 integers, not '8:x'$"
    with pytest.raises(ValueError, match=msg):
        parse_grid("table_bits=8:x")
    with pytest.raises(ValueError, match=r"^grid values of table_bits must not be empty, not '9:8'$"):
        parse_grid("table_bits=9:8")
    with pytest.raises(ValueError, match=r"^grid field 'out_bits' is given twice$"):
        parse_grid("out_bits=4,out_bits=5")


def test_grid_values_use_the_plans_own_limits(net, plan):
    import numpy as np

    from fxnet_widgets.core.analysis.search.grid import apply_settings, check_grid

    assert check_grid({"table_bits": np.int64(8), "acc_overflow": "saturate"}) == {
        "table_bits": [8], "acc_overflow": ["saturate"]}  # fmt: skip
    # the same message as the plan's own check of the field (plan.py: "<field> must be between lo and hi")
    with pytest.raises(ValueError) as plan_err:
        plan.replace(out_bits=17)
    with pytest.raises(ValueError) as grid_err:
        check_grid({"out_bits": [17]})
    assert str(grid_err.value) == "grid values of " + str(plan_err.value)
    with pytest.raises(ValueError, match=r"^grid values of acc_overflow must be one of wrap, saturate, not 'clip'$"):
        check_grid({"acc_overflow": ["clip"]})
    with pytest.raises(TypeError, match=r"^grid values of weight_bits must be an integer, not True$"):
        check_grid({"weight_bits": [True]})
    with pytest.raises(ValueError, match=r"^layers\[0\]\.weight_bits must be between 1 and 32, not 34$"):
        apply_settings(net, plan, {"weight_frac": 30}, None, keep_range=True)
