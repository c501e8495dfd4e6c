"""Contract limits and bad input the kernel and image reader refuse: exact one-line errors."""

import re

import numpy as np
import pytest
from fxdocs import NET_DOC, PLAN_LAYER

import fxnet_widgets as fw
from fxnet_widgets.core.fileio import FileFormatError


@pytest.mark.parametrize(
    "codes,exc,message",
    [
        (np.array([[300, 0, 0]]), ValueError, "codes must be between 0 and 255 (8-bit unsigned), not 300"),
        (np.array([[-1, 0, 0]]), ValueError, "codes must be between 0 and 255 (8-bit unsigned), not -1"),
        (np.array([[0.5, 0, 0]]), TypeError, "codes must be an array of unsigned integer codes, not float64"),
        (np.zeros((2, 4), np.int64), ValueError, "codes must have 3 columns (one per network input), not 4"),
        (np.zeros((2, 2, 4), np.uint8), ValueError, "codes image must have 3 channels, not 4"),
        (np.zeros(3, np.uint8), ValueError, "codes must be N x 3 or H x W x 3, not shape (3,)"),
    ],
)
def test_bad_codes_are_errors_never_wraps(codes, exc, message):
    net = fw.Network.from_dict(NET_DOC)
    plan = fw.Plan.uniform(net, **PLAN_LAYER)
    with pytest.raises(exc, match="^" + re.escape(message) + "$"):
        fw.emulate(net, plan, codes)


def test_truncated_image_is_a_clear_error(tmp_path):
    from fxnet_widgets.core.images import image_to_png_bytes, read_image

    data = image_to_png_bytes(np.zeros((20, 20, 3), np.uint8))
    p = tmp_path / "cut.png"
    p.write_bytes(data[:-20])  # the image data and end chunks cut off
    with pytest.raises(FileFormatError, match=r"cut\.png: broken or truncated image \(.*\)$"):
        read_image(p)


def test_int64_proof_refuses_impossible_plans():
    # the worst case cannot exceed int64 within the contract's limits; the proof still runs:
    net = fw.Network.from_layers([(np.full((1, 4096), 1e10), [0.0], "identity")], input_bits=16)
    plan = fw.Plan.uniform(net, weight_bits=32, weight_frac=0, acc_bits=62, out_bits=16, out_frac=0)
    q = fw.build_integer_network(net, plan)
    # 4096 * (2^31 - 1) * (2^16 - 1) < 2^63: the largest sum the limits allow
    assert q.layers[0].sum_max[0] == 4096 * (2**31 - 1) * (2**16 - 1) < 2**63
