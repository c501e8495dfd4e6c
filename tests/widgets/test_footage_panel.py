"""FootagePanel without a browser: its arrays against the core (analyse_footage, emulate)."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("av")

from fxnet_widgets.core.footage import analyse_footage, demo_frames, write_demo_clip  # noqa: E402
from fxnet_widgets.core.kernel import emulate  # noqa: E402
from fxnet_widgets.widgets.footage import FootagePanel  # noqa: E402
from fxnet_widgets.widgets.session import Session  # noqa: E402

N, W, H = 8, 64, 40


@pytest.fixture(scope="module")
def clip(tmp_path_factory):
    return write_demo_clip(tmp_path_factory.mktemp("clip") / "belt.mkv", n_frames=N, width=W, height=H)


@pytest.fixture()
def session(fruit_net, fruit_plan, belt_image):
    return Session(fruit_net, image=belt_image, plan=fruit_plan.replace(out_bits=4, acc_bits=15))


def test_timeline_and_frame_match_the_core(session, clip):
    panel = FootagePanel(session, clip, background=False)
    ref = analyse_footage(session.network, session.plan, clip)
    assert panel.result is not None and panel.result.frames == ref.frames
    assert np.array_equal(panel.differ_line.y, ref.series("differ").astype(np.float32))
    assert np.array_equal(panel.events_line.y, ref.series("events").astype(np.float32))
    assert panel.differ_line.y.dtype == np.float32  # bqplot gets float32, never int64
    frames = demo_frames(N, W, H)
    for i in (0, N // 2, N - 1):
        panel.slider.value = i
        fx, fl = panel.frame_difference(i)
        e = emulate(session.network, session.plan, frames[i])
        assert np.array_equal(fx, e.decisions) and np.array_equal(fl, e.float_decisions)
        assert panel.caption.value.startswith(f"frame {i} at {i / 25:.3f} s: {e.mismatch} of {W * H} pixels differ")
        assert np.array_equal(panel.cursor.x, [i, i])
        assert panel.frame_image.value[:8] == b"\x89PNG\r\n\x1a\n"
    assert not panel.stale and "timeline for the explorer's plan" in panel.status.value
    assert panel.play.max == N - 1 and panel.slider.max == N - 1


def test_click_on_a_point_jumps_to_the_frame(session, clip):
    panel = FootagePanel(session, clip, background=False)
    panel._clicked(panel.points, {"data": {"index": 5, "x": 5.0, "y": 0.0}})
    assert panel.slider.value == 5 and np.array_equal(panel.cursor.x, [5, 5])


def test_plan_change_recomputes_and_says_stale_meanwhile(session, clip, fruit_plan):
    panel = FootagePanel(session, clip)
    assert panel.wait(120)
    old = panel.result
    assert old is not None and not panel.stale
    new_plan = fruit_plan.replace(out_bits=3, acc_bits=14)
    session.plan = new_plan
    # until the new run has finished, what is on screen belongs to the earlier plan and says so
    if panel.result is old:
        assert panel.stale and "stale" in panel.status.value
    assert panel.wait(120)
    assert panel.result is not None and panel.result.plan == new_plan and not panel.stale
    assert panel.result.frames == analyse_footage(session.network, new_plan, clip).frames
    assert "stale" not in panel.status.value and panel.progress.value == panel.progress.max


def test_rejects_what_is_not_a_session(clip):
    with pytest.raises(TypeError, match=r"^explorer must be an Explorer or a Session, not str$"):
        FootagePanel("explorer", clip)


# -- the explorer follows the frame ---------------------------------------------------------
def test_explorer_views_follow_the_frame_and_get_their_image_back(session, clip, tmp_path):
    from fxnet_widgets.core.images import save_png

    frames = demo_frames(N, W, H)
    masks = tmp_path / "masks"
    masks.mkdir()
    for i, f in enumerate(frames[:-1]):  # no mask for the last frame
        save_png(masks / f"{i}.png", (emulate(session.network, session.plan, f).float_decisions * 255).astype(np.uint8))
    before = session.data
    seen = []
    session.add_view("probe", lambda r: seen.append(r.image.codes.shape if r.image is not None else None))
    panel = FootagePanel(session, clip, background=False, labels=masks)
    for i in (0, 3, N - 1):
        panel.slider.value = i
        r = session.result  # the session's own update loop computed it: every view got this result
        assert np.array_equal(session.image, frames[i]) and seen[-1] == frames[i].shape
        # the explorer's arrays are emulate's on that frame (the reference: the kernel itself)
        e = emulate(session.network, session.plan, r.image.codes)
        assert np.array_equal(r.image.fixed, e.decisions) and np.array_equal(r.image.float_, e.float_decisions)
        assert r.generation == session.version or not session.pending
        assert panel.explorer_frame == i and f"frame {i} at {i / 25:.3f} s of belt.mkv" in panel.explorer_note.value
        if i < N - 1:  # the mask of the frame: the float network's own decisions, so float accuracy is 1
            assert np.array_equal(session.image_labels, e.float_decisions)
            assert "with its labels" in panel.explorer_note.value
        else:
            assert session.image_labels is None and "no label mask for this frame" in panel.explorer_note.value
    assert f"the explorer shows frame {N - 1}" in panel.summary()
    panel._clicked(panel.points, {"data": {"index": 2}})  # a click on the timeline moves the explorer too
    assert panel.explorer_frame == 2 and np.array_equal(session.image, frames[2])
    panel.follow.value = False  # unticked: the explorer gets its own image back
    assert session.data is before and np.array_equal(session.result.image.codes, before.image)
    assert panel.explorer_frame is None and "its own image" in panel.explorer_note.value
    panel.slider.value = 4  # not following: the explorer keeps its image
    assert session.data is before
    panel.follow.value = True
    assert panel.explorer_frame == 4
    panel.close()  # closed: its image back, and plan changes no longer start a timeline
    assert session.data is before and session.image_note == before.image_note
    session.plan = session.plan.replace(out_bits=5)
    assert panel.result is not None and panel.result.plan != session.plan


def test_a_bad_frame_image_leaves_the_session_as_it_was(session):
    before = session.data
    with pytest.raises(ValueError, match=r"image must have 3 channels, not 2$"):
        session.set_image(np.zeros((4, 4, 2), np.uint8))
    with pytest.raises(ValueError, match=r"^image_labels must have the image's shape \(4, 4\), not \(2, 2\)$"):
        session.set_image(np.zeros((4, 4, 3), np.uint8), np.zeros((2, 2), np.int64))
    assert session.data is before


def test_every_explorer_view_shows_the_current_frame(fruit_net, fruit_plan, belt_image, labelled_samples, clip):
    from widget_checks import assert_explorer_matches_kernel

    from fxnet_widgets.widgets import Explorer

    codes, labels = labelled_samples
    ex = Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)
    panel = FootagePanel(ex, clip, background=False)
    frames = demo_frames(N, W, H)
    for i in (1, N - 2):
        panel.slider.value = i
        # preview, slices, events, histograms: what the kernel computes on this frame (and the samples)
        assert_explorer_matches_kernel(ex, frames[i])
        assert not ex.session.view_errors and not ex.session.error
        assert f"frame {i} at {i / 25:.3f} s of belt.mkv" in ex.session.image_note
    ex.session.plan = fruit_plan.replace(out_bits=5)  # a plan change: the explorer still shows the frame
    assert_explorer_matches_kernel(ex, frames[N - 2])
    panel.close()
    assert_explorer_matches_kernel(ex, belt_image)


def test_a_network_swap_recomputes_against_the_original_float(session, clip):
    """After the explorer's refine swaps a network in, the timeline's "float" stays the original network.

    Outside reference: the original network's own float64 forward pass (``emulate(...).float_decisions``
    of the original network) on each decoded frame.
    """
    import dataclasses

    panel = FootagePanel(session, clip, background=False)
    original = session.network
    first = original.layers[0]
    other = original.replace_layers([dataclasses.replace(first, weights=np.asarray(first.weights) * 1.5),
                                     *original.layers[1:]])  # fmt: skip
    session.use_network(other)
    session.flush()
    r = panel.result
    assert r is not None and r.network == other and r.float_network == original and not panel.stale
    assert r.frames == analyse_footage(other, session.plan, clip, reference=original).frames
    frames = demo_frames(N, W, H)
    own = [emulate(other, session.plan, f).float_decisions for f in frames]
    # the swapped network's own float differs from the original's somewhere (else this proves nothing)
    assert any(not np.array_equal(o, emulate(original, session.plan, f).float_decisions) for o, f in zip(own, frames))
    for i in (0, N - 1):
        fx, fl = panel.frame_difference(i)
        assert np.array_equal(fx, emulate(other, session.plan, frames[i]).decisions)
        assert np.array_equal(fl, emulate(original, session.plan, frames[i]).float_decisions)
    panel.close()
    session.use_network(original)
    session.flush()
    assert panel.result is r  # a closed panel no longer follows the session
