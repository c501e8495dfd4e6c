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
