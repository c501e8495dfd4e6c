"""The preview alone: class colours named by the network's classes, several classes included."""

from __future__ import annotations

from widget_checks import decode_classes

from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.render.palette import class_colours, hex_colour
from fxnet_widgets.widgets import PreviewPanel, Session


def test_several_classes_get_a_class_legend_and_a_difference_legend(colour_net, belt_image):
    s = Session(colour_net, image=belt_image)
    p = PreviewPanel(s)
    for colour, name in zip(class_colours(3), colour_net.classes):
        assert hex_colour(colour) in p.legend.value and name in p.legend.value
    assert "choose different classes" in p.legend.value and "choose different classes" in p.note.value
    emu = emulate(colour_net, s.plan, belt_image)
    assert (decode_classes(p.fixed_image.value, 3) == emu.decisions).all()


def test_two_classes_name_the_target(fruit_net, fruit_plan, belt_image):
    p = PreviewPanel(Session(fruit_net, image=belt_image, plan=fruit_plan))
    assert "only fixed point says ripe" in p.legend.value and "only float says ripe" in p.legend.value


def test_a_plan_change_that_keeps_every_decision_keeps_the_pictures(fruit_net, fruit_plan, belt_image):
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    p = PreviewPanel(s)
    before_fixed, before_overlay = p.fixed_image.value, p.overlay_image.value
    # one more accumulator bit than the widest sum needs cannot change a decision (semantics.md, step 4:
    # without overflow s_A is the exact sum); the reference is the kernel's own emulation of the new plan
    wider = s.plan.replace(acc_bits=max(lp.acc_bits for lp in s.plan.layers) + 1)
    assert (emulate(fruit_net, wider, belt_image).decisions == emulate(fruit_net, s.plan, belt_image).decisions).all()
    s.plan = wider
    assert p.fixed_image.value is before_fixed and p.overlay_image.value is before_overlay
    # a plan whose decisions differ redraws, and the picture is of the new decisions
    coarse = s.plan.replace(table_bits=3)
    emu = emulate(fruit_net, coarse, belt_image)
    assert (emu.decisions != emulate(fruit_net, wider, belt_image).decisions).any()
    s.plan = coarse
    assert p.fixed_image.value is not before_fixed
    assert (decode_classes(p.fixed_image.value, 2) == emu.decisions).all()
