"""Plan comparison: the table and pictures of A against B, checked with independent kernel runs."""

from __future__ import annotations

import numpy as np
import pytest
from widget_checks import decode_rgb, slice_input

from fxnet_widgets.core.analysis import hardware_cost
from fxnet_widgets.core.kernel import EVENT_NAMES, emulate
from fxnet_widgets.render.palette import FIXED_ONLY, FLOAT_ONLY, slice_palette
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.compare import ComparePanel


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


def rows(cmp):
    return {label: (a, b) for label, a, b in cmp.comparison.rows}


def test_a_against_b_table(explorer, fruit_net, belt_image, labelled_samples):
    a = explorer.plan
    b = a.replace(layer=0, weight_bits=5, weight_frac=1).replace(layer=1, acc_bits=9)
    cmp = explorer.compare(b)
    assert cmp.comparison.plan_a == a and cmp.comparison.plan_b == b
    got = rows(cmp)
    for plan, col in ((a, 0), (b, 1)):
        totals = hardware_cost(fruit_net, plan).totals()
        for k, v in totals.items():
            assert got[f"cost {k}"][col] == v
        # events: counted on the image and the samples; clipped weights/biases (plan facts) once
        emus = [emulate(fruit_net, plan, belt_image), emulate(fruit_net, plan, labelled_samples[0])]
        for name in EVENT_NAMES:
            per = [sum(int(np.sum(e.events[li][name])) for li in range(2)) for e in emus]
            want = per[0] if name in ("weight_clip", "bias_clip") else sum(per)
            assert got[f"events {name}"][col] == want
        assert got["image: decisions differing from float"][col] == int(
            np.count_nonzero(emus[0].decisions != emus[0].float_decisions))
        lab = labelled_samples[1]
        assert got["samples: accuracy (%)"][col] == pytest.approx(100 * np.mean(emus[1].decisions == lab))
    da, db = emulate(fruit_net, a, belt_image).decisions, emulate(fruit_net, b, belt_image).decisions
    assert cmp.comparison.image_differ == int(np.count_nonzero(da != db)) > 0
    # the change column: fewer adders in B is good (green), more events bad (red)
    assert "font-weight:bold;color:#2d6a2d'>-" in cmp.table.value
    assert f"cost adders: {got['cost adders'][0]} -> {got['cost adders'][1]}" in cmp.text


def test_pictures_show_a_against_b(explorer, fruit_net, belt_image):
    a = explorer.plan
    b = a.replace(layer=0, weight_bits=4, weight_frac=1)
    cmp = explorer.compare(b)
    da, db = emulate(fruit_net, a, belt_image).decisions, emulate(fruit_net, b, belt_image).decisions
    over = decode_rgb(cmp.image.value)
    magenta = (over == np.array(FIXED_ONLY, np.uint8)).all(axis=-1)
    teal = (over == np.array(FLOAT_ONLY, np.uint8)).all(axis=-1)
    assert np.array_equal(magenta, (db == 1) & (da == 0))  # only B says ripe
    assert np.array_equal(teal, (db == 0) & (da == 1))  # only A says ripe
    pal = slice_palette(2).astype(np.int64)
    s = explorer.session
    c = np.arange(0, 256, 2)
    for (xi, yi, fi), im in zip(((0, 1, 2), (0, 2, 1), (1, 2, 0)), cmp.slice_images):
        grid = slice_input(c, xi, yi, fi, s.slice_positions[fi])
        sa, sb = emulate(fruit_net, a, grid).decisions, emulate(fruit_net, b, grid).decisions
        # slice colours (render.comparison_codes on B, A): 0 both other, 1 both ripe, 2 only B, 3 only A
        want = np.where(sa == sb, sa, np.where(sb > sa, 2, 3))[::-1]  # high codes at the top
        rgb = decode_rgb(im.value).astype(np.int64)
        code = (rgb[:, :, None, :] == pal[None, None]).all(-1).argmax(-1)
        assert np.array_equal(code, want)


def test_b_follows_the_sliders_and_pin(explorer):
    cmp = ComparePanel(explorer)
    assert cmp.comparison.image_differ == 0 and all(a == b for _, a, b in cmp.comparison.rows)
    explorer.controls.sliders["weight_bits"].value = 5
    assert cmp.comparison.plan_b == explorer.plan != cmp.plan_a
    assert cmp.comparison.samples_differ == int(np.count_nonzero(
        emulate(explorer.session.network, cmp.plan_a, explorer.session.samples).decisions
        != emulate(explorer.session.network, explorer.plan, explorer.session.samples).decisions))
    cmp.pin_button.click()
    assert cmp.plan_a == explorer.plan and cmp.comparison.image_differ == 0
    fixed = explorer.compare(cmp.plan_a.replace(acc_bits=12))
    explorer.controls.sliders["weight_bits"].value = 7
    assert fixed.comparison.plan_b.layers[0].acc_bits == 12  # a given B stays


def test_bad_plan_is_refused(explorer):
    with pytest.raises(TypeError, match=r"^plan_b must be a Plan, not dict$"):
        explorer.compare({"layers": []})


def test_calibrated_cost_rows_are_labelled_as_estimates_for_the_device(explorer, fruit_net, tmp_path):
    # the luts/ffs/brams rows are calibrated estimates for hardware_cost's target, not synthesis runs:
    # the table (widget and report) says so and names the device (project caution: open-tool figures
    # are estimates for the named device and tool version, not sign-off)
    b = explorer.plan.replace(layer=0, weight_bits=5, weight_frac=1)
    cmp = explorer.compare(b)
    target = hardware_cost(fruit_net, b).target
    got = rows(cmp)
    assert got["cost luts"][1] == hardware_cost(fruit_net, b).estimated()["luts"]
    note = cmp.comparison.estimate_note
    assert f"calibrated estimates for {target}" in note and "not sign-off" in note
    assert note in cmp.table.value.replace("&#x27;", "'")
    text = explorer.save_report(tmp_path / "r.html").read_text(encoding="utf-8")
    section = text[text.index('<section id="compare">'):]
    section = section[: section.index("</section>")]
    assert f"cost luts, ffs, brams: calibrated estimates for {target}" in section
