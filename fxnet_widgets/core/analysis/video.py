"""Throughput of a one-sample-per-clock pipeline against standard video formats.

A pipelined datapath takes one pixel per clock, so it must be clocked at least
at the format's pixel clock: the total raster (active picture plus blanking)
times the frame rate. :data:`VIDEO_FORMATS` holds the standard progressive
formats with their total raster and pixel clock (CTA-861 timings, as also
listed in Linux ``include/uapi/linux/v4l2-dv-timings.h``); the 1000/1001
variants (59.94 Hz) have the clock multiplied by 1000/1001.

Examples
--------
>>> t = throughput("1280x720p60", max_clock_hz=200e6)
>>> t.needed_clock_hz, round(t.margin, 3)
(74250000.0, 2.694)
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Any

__all__ = ["VideoFormat", "VIDEO_FORMATS", "Throughput", "throughput", "DEFAULT_MAX_CLOCK_HZ"]

#: the maximum clock assumed when none is given: the low end of what a pipelined
#: design commonly reaches (200-300 MHz, common practice)
DEFAULT_MAX_CLOCK_HZ = 200e6


@dataclass(frozen=True)
class VideoFormat:
    """A progressive video format: active and total raster, pixel clock (exact)."""

    name: str
    active_width: int
    active_height: int
    total_width: int
    total_height: int
    pixel_clock: Fraction  # Hz, exact
    source: str

    @property
    def pixel_clock_hz(self) -> float:
        return float(self.pixel_clock)

    @property
    def frame_rate(self) -> Fraction:
        """Frames per second: ``pixel_clock / (total_width * total_height)`` (exact)."""
        return self.pixel_clock / (self.total_width * self.total_height)

    @property
    def active_rate_hz(self) -> float:
        """Active pixels per second (what a design with a full-line buffer could get by with)."""
        return float(self.frame_rate * self.active_width * self.active_height)

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "active": [self.active_width, self.active_height],
            "total": [self.total_width, self.total_height],
            "pixel_clock_hz": self.pixel_clock_hz,
            "frame_rate_hz": float(self.frame_rate),
            "source": self.source,
        }


def _formats() -> dict[str, VideoFormat]:
    out: dict[str, VideoFormat] = {}

    def add(name: str, aw: int, ah: int, tw: int, th: int, clock: Fraction, source: str) -> None:
        out[name] = VideoFormat(name, aw, ah, tw, th, clock, source)

    # 640x480: CTA-861 VIC 1 is specified at 25.175 MHz (59.94 Hz) and 25.2 MHz (60 Hz)
    add("640x480p59.94", 640, 480, 800, 525, Fraction(25_175_000), "CTA-861 VIC 1 (25.175 MHz)")
    add("640x480p60", 640, 480, 800, 525, Fraction(25_200_000), "CTA-861 VIC 1 (25.2 MHz)")
    for name, aw, ah, tw, th, clock, vic in (
        ("1280x720", 1280, 720, 1650, 750, 74_250_000, 4),
        ("1920x1080", 1920, 1080, 2200, 1125, 148_500_000, 16),
        ("3840x2160", 3840, 2160, 4400, 2250, 594_000_000, 97),
    ):
        add(f"{name}p60", aw, ah, tw, th, Fraction(clock), f"CTA-861 VIC {vic}")
        slow = Fraction(clock) * Fraction(1000, 1001)
        add(f"{name}p59.94", aw, ah, tw, th, slow, f"CTA-861 VIC {vic}, clock x 1000/1001")
    return out


#: built-in formats by name (``"1280x720p60"``, ``"1280x720p59.94"``, ...)
VIDEO_FORMATS: dict[str, VideoFormat] = _formats()


@dataclass(frozen=True)
class Throughput:
    """The clock a format needs at one sample per clock, against a maximum clock.

    ``margin = max_clock_hz / needed_clock_hz`` (>= 1 means the design keeps up);
    ``headroom = 1 - needed_clock_hz / max_clock_hz``.
    """

    format: VideoFormat
    samples_per_clock: int
    needed_clock_hz: float
    max_clock_hz: float
    margin: float
    headroom: float
    ok: bool

    def summary(self) -> str:
        f = self.format
        verdict = "keeps up" if self.ok else "too slow"
        return (
            f"video {f.name} ({f.total_width} x {f.total_height} total at {float(f.frame_rate):.3f} Hz): "
            f"needs {self.needed_clock_hz / 1e6:.3f} MHz at {self.samples_per_clock} sample(s) per clock; "
            f"maximum clock {self.max_clock_hz / 1e6:.3f} MHz, margin x{self.margin:.3f} ({verdict})"
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "format": self.format.to_dict(),
            "samples_per_clock": self.samples_per_clock,
            "needed_clock_hz": self.needed_clock_hz,
            "max_clock_hz": self.max_clock_hz,
            "margin": self.margin,
            "headroom": self.headroom,
            "ok": self.ok,
        }


def throughput(
    format_name: str | VideoFormat, max_clock_hz: float = DEFAULT_MAX_CLOCK_HZ, *, samples_per_clock: int = 1
) -> Throughput:
    """The clock a video format needs and the margin against ``max_clock_hz``.

    ``needed_clock_hz = pixel_clock / samples_per_clock`` where ``pixel_clock =
    total_width * total_height * frame_rate`` (blanking included: pixels arrive
    at the pixel clock).

    Parameters
    ----------
    format_name
        A key of :data:`VIDEO_FORMATS` or a :class:`VideoFormat`.
    max_clock_hz
        The highest clock the design reaches (default 200 MHz).
    samples_per_clock
        Parallel copies of the datapath (1: one sample per clock).
    """
    if isinstance(format_name, VideoFormat):
        fmt = format_name
    elif isinstance(format_name, str):
        if format_name not in VIDEO_FORMATS:
            raise ValueError(f"video format must be one of {', '.join(VIDEO_FORMATS)}, not {format_name!r}")
        fmt = VIDEO_FORMATS[format_name]
    else:
        raise TypeError(f"video format must be a name or a VideoFormat, not {format_name!r}")
    if isinstance(max_clock_hz, bool) or not isinstance(max_clock_hz, (int, float)):
        raise TypeError(f"max_clock_hz must be a number, not {max_clock_hz!r}")
    if not max_clock_hz > 0 or max_clock_hz == float("inf"):
        raise ValueError(f"max_clock_hz must be a positive finite number, not {max_clock_hz!r}")
    if isinstance(samples_per_clock, bool) or not isinstance(samples_per_clock, int):
        raise TypeError(f"samples_per_clock must be an integer, not {samples_per_clock!r}")
    if samples_per_clock < 1:
        raise ValueError(f"samples_per_clock must be at least 1, not {samples_per_clock!r}")
    needed = float(fmt.pixel_clock / samples_per_clock)
    margin = float(max_clock_hz) / needed
    headroom = 1.0 - needed / max_clock_hz
    return Throughput(fmt, samples_per_clock, needed, float(max_clock_hz), margin, headroom, margin >= 1.0)
