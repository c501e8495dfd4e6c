"""Video timing table and the one-pixel-per-clock throughput check."""

from fractions import Fraction

import pytest

from fxnet_widgets.core.analysis import VIDEO_FORMATS, throughput


def test_timing_identities_cta_861():
    # CTA-861 VIC 4, 16, 97 (also Linux include/uapi/linux/v4l2-dv-timings.h):
    # pixel clock = total samples x total lines x frame rate
    f = VIDEO_FORMATS["1280x720p60"]
    assert (f.total_width, f.total_height) == (1650, 750) and f.pixel_clock == 1650 * 750 * 60 == 74_250_000
    f = VIDEO_FORMATS["1920x1080p60"]
    assert (f.total_width, f.total_height) == (2200, 1125) and f.pixel_clock == 2200 * 1125 * 60 == 148_500_000
    f = VIDEO_FORMATS["3840x2160p60"]
    assert (f.total_width, f.total_height) == (4400, 2250) and f.pixel_clock == 4400 * 2250 * 60 == 594_000_000
    for name in ("1280x720p60", "1920x1080p60", "3840x2160p60", "640x480p60"):
        assert VIDEO_FORMATS[name].frame_rate == 60


def test_vga_and_1000_1001_variants():
    # CTA-861 VIC 1: 25.175 MHz / (800 x 525) = 59.94 Hz
    f = VIDEO_FORMATS["640x480p59.94"]
    assert f.pixel_clock == 25_175_000 and (f.total_width, f.total_height) == (800, 525)
    assert round(float(f.frame_rate), 2) == 59.94
    # Linux V4L2 docs, V4L2_DV_FL_REDUCED_FPS: the clock divided by 1.001
    for name in ("1280x720", "1920x1080", "3840x2160"):
        slow, full = VIDEO_FORMATS[f"{name}p59.94"], VIDEO_FORMATS[f"{name}p60"]
        assert slow.pixel_clock * Fraction(1001, 1000) == full.pixel_clock
        assert slow.frame_rate == Fraction(60_000, 1001)
    assert VIDEO_FORMATS["640x480p60"].active_rate_hz == 640 * 480 * 60


def test_throughput_margin():
    t = throughput("1280x720p60", max_clock_hz=200e6)
    assert t.needed_clock_hz == 74.25e6 and t.margin == 200e6 / 74.25e6 and t.ok
    t = throughput("3840x2160p60", max_clock_hz=297e6)  # 594 MHz needed (CTA-861 VIC 97)
    assert not t.ok and t.margin == 0.5 and t.headroom == -1.0
    t = throughput("3840x2160p60", max_clock_hz=300e6, samples_per_clock=2)
    assert t.needed_clock_hz == 297e6 and t.ok
    assert t.summary().startswith("video 3840x2160p60 (4400 x 2250 total at 60.000 Hz): needs 297.000 MHz")


def test_throughput_bad_input():
    with pytest.raises(ValueError, match=r"^video format must be one of 640x480p59\.94, .*, not '720p'$"):
        throughput("720p")
    with pytest.raises(ValueError, match=r"^max_clock_hz must be a positive finite number, not 0$"):
        throughput("1280x720p60", 0)
    with pytest.raises(TypeError, match=r"^max_clock_hz must be a number, not '200e6'$"):
        throughput("1280x720p60", "200e6")
    with pytest.raises(ValueError, match=r"^samples_per_clock must be at least 1, not 0$"):
        throughput("1280x720p60", samples_per_clock=0)
