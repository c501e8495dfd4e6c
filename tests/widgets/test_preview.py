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
