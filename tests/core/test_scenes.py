"""The procedural produce-belt scenes: reproducible, with consistent ground truth."""

import numpy as np
import pytest

from fxnet_widgets.core.scenes import CLASS_COLOURS, CLASSES, LIGHTINGS, Lighting, class_map_image, make_scene


@pytest.fixture(scope="module")
def pair():
    return make_scene(1, "train"), make_scene(2, "test")


def test_same_seed_same_frame_other_seed_other_frame():
    a = make_scene(7, "train", width=200, height=120)
    b = make_scene(7, "train", width=200, height=120)
    c = make_scene(8, "train", width=200, height=120)
    np.testing.assert_array_equal(a.image, b.image)
    np.testing.assert_array_equal(a.classes, b.classes)
    assert not np.array_equal(a.image, c.image)


def test_frames_hold_every_class(pair):
    for scene in pair:
        assert scene.image.shape == (360, 640, 3) and scene.image.dtype == np.uint8
        counts = np.bincount(scene.classes.ravel(), minlength=len(CLASSES))
        assert (counts > 0).all(), dict(zip(CLASSES, counts.tolist()))
        # the job's class is a few percent of the frame, the belt most of it
        assert 0.02 < counts[CLASSES.index("ripe")] / scene.classes.size < 0.15
        assert counts[CLASSES.index("background")] / scene.classes.size > 0.5


def test_mask_and_class_map_follow_the_classes(pair):
    scene = pair[0]
    np.testing.assert_array_equal(scene.mask == 255, scene.classes == CLASSES.index("ripe"))
    assert set(np.unique(scene.mask).tolist()) == {0, 255}
    cmap = scene.class_map
    for name, colour in CLASS_COLOURS.items():
        sel = scene.classes == CLASSES.index(name)
        assert (cmap[sel] == colour).all()
    np.testing.assert_array_equal(
        class_map_image(np.array([[0, 1]])), [[CLASS_COLOURS["background"], CLASS_COLOURS["ripe"]]]
    )


def test_ripe_skin_is_red_and_lighting_differs(pair):
    train, test = pair
    for scene in pair:
        ripe = scene.image[scene.classes == CLASSES.index("ripe")].astype(np.int64)
        unripe = scene.image[scene.classes == CLASSES.index("unripe")].astype(np.int64)
        assert np.median(ripe[:, 0] - ripe[:, 1]) > 80
        assert np.median(unripe[:, 1] - unripe[:, 0]) > 0
    belt_tr = train.image[train.classes == 0].astype(np.float64).mean(axis=0)
    belt_te = test.image[test.classes == 0].astype(np.float64).mean(axis=0)
    # warm lamp vs cool daylight: the belt's red/blue balance flips
    assert belt_tr[0] > belt_tr[2] and belt_te[2] > belt_te[0]
    highlight = train.image[train.classes == CLASSES.index("highlight")].astype(np.int64)
    assert highlight.min(axis=1).mean() > 150  # washed-out near-white pixels


def test_custom_lighting_and_errors():
    dark = Lighting("dim", (1.0, 1.0, 1.0), 0.3, (0.0, 0.0, 1.0), 0.05, 0.0, 0.0)
    bright = Lighting("bright", (1.0, 1.0, 1.0), 1.0, (0.0, 0.0, 1.0), 0.05, 0.0, 0.0)
    a = make_scene(3, dark, width=64, height=48)
    b = make_scene(3, bright, width=64, height=48)
    np.testing.assert_array_equal(a.classes, b.classes)
    assert a.image.mean() < b.image.mean()
    assert set(LIGHTINGS) == {"train", "test"}
    with pytest.raises(ValueError, match=r"^lighting must be one of train, test or a Lighting, not 'noon'$"):
        make_scene(0, "noon")
    with pytest.raises(ValueError, match=r"^width must be between 32 and 4096, not 8$"):
        make_scene(0, width=8)
    with pytest.raises(ValueError, match=r"^seed must be a non-negative integer, not -1$"):
        make_scene(-1)
