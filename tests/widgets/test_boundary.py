"""The slices and the cube alone: several classes get a class map of the cube and legends by class name."""

from __future__ import annotations

import numpy as np
from widget_checks import decode_classes

from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.widgets import BoundaryPanel, CubePanel, Session
from fxnet_widgets.widgets.boundary import cube_class_tiles


def test_the_cube_class_map_is_the_fixed_point_grid(colour_net, belt_image):
    s = Session(colour_net, image=belt_image, cube_points=16)
    cube = CubePanel(s)
    assert cube.class_map is not None
    g = s.cube_codes
    grid = np.stack(np.meshgrid(g, g, g, indexing="ij"), -1).reshape(-1, 3).astype(np.uint8)
    fixed = emulate(colour_net, s.plan, grid).decisions.reshape(16, 16, 16)
    tiles = decode_classes(cube.class_map.value, 3)
    assert tiles.shape == (16, 64)
    # tile k at blue index (2k + 1) * 16 / 8; red across, green up (row 0 is the top)
    for k in range(4):
        b = (2 * k + 1) * 16 // 8
        assert np.array_equal(tiles[:, 16 * k:16 * (k + 1)], fixed[:, ::-1, b].T)
    assert "choose different classes" in cube.legend.value


def test_two_classes_have_no_class_map_and_name_the_target(fruit_net, fruit_plan, belt_image):
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    assert CubePanel(s).class_map is None
    assert "only float says ripe" in CubePanel(s).legend.value
    assert "both ripe" in BoundaryPanel(s).legend.value


def test_cube_class_tiles_layout():
    f = np.arange(8).reshape(2, 2, 2)  # value 4r + 2g + b
    assert cube_class_tiles(f, levels=2).tolist() == [[2, 6, 3, 7], [0, 4, 1, 5]]
