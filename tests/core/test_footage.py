"""Footage: decoding (against the codec and the colour standards), the colour look-up
(against ``emulate``), and the per-frame analysis."""

from __future__ import annotations

import json
import threading
from fractions import Fraction

import numpy as np
import pytest
from PIL import Image

from fxnet_widgets.core.fileio import FileFormatError
from fxnet_widgets.core.footage import _build as build_module
from fxnet_widgets.core.footage import (
    analyse_footage,
    colour_index,
    compile_float_lookup,
    compile_lookup,
    demo_frames,
    open_footage,
    parse_frames,
    write_demo_clip,
)
from fxnet_widgets.core.footage.lookup import clear_lookup_cache
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan

av = pytest.importorskip("av")


def _frames(n: int = 6, h: int = 24, w: int = 40, seed: int = 0) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    return [rng.integers(0, 256, (h, w, 3), dtype=np.uint8) for _ in range(n)]


def _write(path, frames, codec: str, pix_fmt: str, rate: int = 25, options=None, fmt=None) -> str:
    with av.open(str(path), "w", format=fmt) as c:
        s = c.add_stream(codec, rate=Fraction(rate), options=options or {})
        s.width, s.height, s.pix_fmt = frames[0].shape[1], frames[0].shape[0], pix_fmt
        for f in frames:
            for p in s.encode(av.VideoFrame.from_ndarray(f, format="rgb24")):
                c.mux(p)
        for p in s.encode():
            c.mux(p)
    return str(path)


# -- decoding: lossless codecs give the frames back exactly ----------------------------
@pytest.mark.parametrize(
    "name, codec, pix_fmt, options",
    [
        # FFV1 is lossless by definition (RFC 9043); bgr0 stores R'G'B' without a Y'CbCr step
        ("clip.mkv", "ffv1", "bgr0", {}),
        # H.264 with qp 0 is lossless (ITU-T H.264 "lossless" with qpprime_y_zero_transform_bypass), RGB coding
        ("clip-h264.mkv", "libx264rgb", "bgr24", {"qp": "0", "preset": "ultrafast"}),
        # PNG frames in AVI: lossless (PNG, ISO/IEC 15948)
        ("clip.avi", "png", "rgb24", {}),
    ],
)
def test_lossless_clip_decodes_to_the_exact_frames(tmp_path, name, codec, pix_fmt, options):
    frames = _frames()
    path = _write(tmp_path / name, frames, codec, pix_fmt, options=options)
    clip = open_footage(path)
    got = clip.read()
    assert [f.index for f in got] == list(range(len(frames)))
    for f, ref in zip(got, frames):
        assert f.rgb.dtype == np.uint8 and f.rgb.shape == ref.shape
        assert np.array_equal(f.rgb, ref)
    # frame count and rate: what we wrote, and what PyAV/FFmpeg report for the stream
    with av.open(path) as c:
        st = c.streams.video[0]
        assert clip.info.rate == float(st.average_rate) == 25.0
        assert sum(1 for _ in c.decode(st)) == len(frames)
    assert clip.info.frames == len(frames)
    assert [f.time_s for f in got] == pytest.approx([i / 25 for i in range(len(frames))])
    assert "no conversion" in clip.info.colour


def _ycbcr_clip(path, colorspace: int, planes) -> str:
    h, w = planes[0].shape
    with av.open(str(path), "w") as c:
        s = c.add_stream("ffv1", rate=25)
        s.width, s.height, s.pix_fmt = w, h, "yuv444p"
        s.codec_context.colorspace, s.codec_context.color_range = colorspace, 1
        vf = av.VideoFrame(w, h, "yuv444p")
        for p, a in zip(vf.planes, planes):
            buf = np.zeros((h, p.line_size), np.uint8)  # rows padded to the plane's line size
            buf[:, :w] = a
            p.update(buf)
        vf.colorspace, vf.color_range = colorspace, 1
        for pkt in s.encode(vf):
            c.mux(pkt)
        for pkt in s.encode():
            c.mux(pkt)
    return str(path)


def _rgb_from_ycbcr(y, cb, cr, kr, kb):
    # ITU-R BT.601-7 / BT.709-6, 8-bit limited ("studio") range: Y' = 16 + 219 E'Y,
    # Cb/Cr = 128 + 224 E'Cb/Cr; E'R = E'Y + 2(1 - Kr) E'Cr, E'B = E'Y + 2(1 - Kb) E'Cb,
    # E'G = (E'Y - Kr E'R - Kb E'B) / Kg
    ey, ecb, ecr = (y - 16) / 219, (cb - 128) / 224, (cr - 128) / 224
    r = ey + 2 * (1 - kr) * ecr
    b = ey + 2 * (1 - kb) * ecb
    g = (ey - kr * r - kb * b) / (1 - kr - kb)
    return np.clip(np.array([r, g, b]) * 255, 0, 255)


# patches inside the gamut (no clipping): (Y', Cb, Cr)
_PATCHES = [(16, 128, 128), (235, 128, 128), (120, 100, 160), (90, 150, 110), (180, 110, 140), (60, 140, 120)]


@pytest.mark.parametrize("colorspace, kr, kb, standard", [
    (1, 0.2126, 0.0722, "ITU-R BT.709"),  # BT.709-6 table 3 item 3.2
    (5, 0.299, 0.114, "ITU-R BT.601"),  # BT.601-7 table 2 item 2.2 (tagged BT.470BG)
    (2, 0.299, 0.114, "ITU-R BT.601"),  # untagged: FFmpeg reads BT.601 (its documented default)
])  # fmt: skip
def test_ycbcr_clip_converts_with_the_named_matrix_and_range(tmp_path, colorspace, kr, kb, standard):
    h, w = 8, 8 * len(_PATCHES)
    planes = [np.zeros((h, w), np.uint8) for _ in range(3)]
    for k, yuv in enumerate(_PATCHES):
        for p, v in zip(planes, yuv):
            p[:, 8 * k : 8 * k + 8] = v
    clip = open_footage(_ycbcr_clip(tmp_path / "yuv.mkv", colorspace, planes))
    assert f"{standard} matrix" in clip.info.colour and "limited range" in clip.info.colour
    rgb = clip.read()[0].rgb
    for k, (y, cb, cr) in enumerate(_PATCHES):
        ref = _rgb_from_ycbcr(y, cb, cr, kr, kb)
        got = rgb[4, 8 * k + 4].astype(np.float64)
        # swscale's fixed-point conversion (ACCURATE_RND) is within one code of the exact value
        assert np.all(np.abs(got - ref) <= 1.0), (standard, (y, cb, cr), got, ref)


def test_bt601_and_bt709_differ_on_the_same_codes(tmp_path):
    planes = [np.full((8, 8), v, np.uint8) for v in (120, 100, 160)]
    a = open_footage(_ycbcr_clip(tmp_path / "a.mkv", 1, planes)).read()[0].rgb[4, 4].astype(int)
    b = open_footage(_ycbcr_clip(tmp_path / "b.mkv", 5, planes)).read()[0].rgb[4, 4].astype(int)
    # the same (Y', Cb, Cr) under the two matrices (equations above): R 178.3 vs 171.8
    ref709, ref601 = _rgb_from_ycbcr(120, 100, 160, 0.2126, 0.0722), _rgb_from_ycbcr(120, 100, 160, 0.299, 0.114)
    assert np.abs(ref709 - ref601).max() > 6
    assert np.all(np.abs(a - ref709) <= 1) and np.all(np.abs(b - ref601) <= 1)


# -- ranges, image folders ----------------------------------------------------------------
def test_frame_range_and_stride(tmp_path):
    frames = _frames(10)
    path = _write(tmp_path / "c.mkv", frames, "ffv1", "bgr0")
    got = open_footage(path, "2:9:3").read()
    assert [f.index for f in got] == [2, 5, 8]
    assert all(np.array_equal(f.rgb, frames[f.index]) for f in got)
    assert parse_frames("::2") == slice(0, None, 2) and parse_frames("4") == slice(4, None, 1)
    with pytest.raises(ValueError, match=r"^frames step must be at least 1, not 0$"):
        parse_frames("0:5:0")
    with pytest.raises(ValueError, match=r"^frames must be A:B:S with non-negative integers"):
        parse_frames("a:b")


def test_image_folder_natural_order_glob_and_broken_image(tmp_path):
    frames = _frames(4, 8, 10)
    for name, f in zip(["shot10.png", "shot2.png", "shot1.png", "shot9.tif"], frames):
        Image.fromarray(f).save(tmp_path / name)
    clip = open_footage(tmp_path, rate=10)
    got = clip.read()
    # natural order: shot1, shot2, shot9, shot10
    assert [int(f.rgb[0, 0, 0]) for f in got] == [int(frames[i][0, 0, 0]) for i in (2, 1, 3, 0)]
    assert [f.time_s for f in got] == [0.0, 0.1, 0.2, 0.3]
    assert clip.info.kind == "images" and clip.info.frames == 4
    assert len(open_footage(str(tmp_path / "shot*.png")).read()) == 3
    (tmp_path / "shot5.png").write_bytes(b"\x89PNG\r\n\x1a\nbroken")
    clip = open_footage(tmp_path)
    got = clip.read()
    assert len(got) == 4 and [f.index for f in got] == [0, 1, 3, 4]
    assert len(clip.info.broken) == 1 and clip.info.broken[0].startswith("frame 2: ")


# -- bad files: one clear line --------------------------------------------------------------
def test_bad_files_give_one_line(tmp_path):
    good = _write(tmp_path / "good.mkv", _frames(6), "ffv1", "bgr0")
    data = open(good, "rb").read()
    cases = {
        "missing.mp4": None,
        "empty.mp4": b"",
        "junk.mp4": b"this is not a video " * 50,
        "header.mkv": data[:300],
    }
    for name, content in cases.items():
        p = tmp_path / name
        if content is not None:
            p.write_bytes(content)
        with pytest.raises(FileFormatError) as e:
            open_footage(p).read()
        msg = str(e.value)
        assert "\n" not in msg and msg.startswith(str(p) + ": "), msg
    assert str(tmp_path / "missing.mp4") + ": no such file" == _err(tmp_path / "missing.mp4")
    assert _err(tmp_path / "empty.mp4").endswith("must be a video file, not an empty file")
    assert "must be a video container FFmpeg can read" in _err(tmp_path / "junk.mp4")


def _err(path, **kw) -> str:
    with pytest.raises(FileFormatError) as e:
        open_footage(path, **kw).read()
    return str(e.value)


def test_zero_frames_huge_frames_and_no_video_stream(tmp_path):
    path = _write(tmp_path / "c.mkv", _frames(4), "ffv1", "bgr0")
    assert _err(path, frames="10:20") == f"{path}: frames 10:20:1 must hold at least one decodable frame, not 0"
    assert _err(path, max_pixels=500) == f"{path}: frame size must be at most 500 pixels, not 40x24"
    audio = tmp_path / "tone.mka"
    with av.open(str(audio), "w") as c:
        s = c.add_stream("pcm_s16le", rate=8000, layout="mono")
        fr = av.AudioFrame.from_ndarray(np.zeros((1, 800), np.int16), format="s16", layout="mono")
        fr.sample_rate = 8000
        for p in s.encode(fr):
            c.mux(p)
        for p in s.encode():
            c.mux(p)
    assert _err(audio) == f"{audio}: must hold a video stream, not 1 other streams"


def test_truncated_clip_reports_the_missing_frames(tmp_path):
    frames = _frames(10)
    path = _write(tmp_path / "c.mkv", frames, "ffv1", "bgr0")
    data = open(path, "rb").read()
    cut = tmp_path / "cut.mkv"
    cut.write_bytes(data[: len(data) // 2])
    clip = open_footage(cut)
    got = clip.read()
    assert 0 < len(got) < 10 and all(np.array_equal(f.rgb, frames[f.index]) for f in got)
    assert clip.info.broken == [f"after frame {len(got) - 1}: the file ends, but its header announces 10 frames "
                                "(truncated?)"]  # fmt: skip


def test_one_broken_frame_is_reported_and_skipped(tmp_path):
    frames = _frames(8)
    path = _write(tmp_path / "c.avi", frames, "png", "rgb24")
    with av.open(path) as c:
        packets = [(p.pos, p.size) for p in c.demux(c.streams.video[0]) if p.size]
    data = bytearray(open(path, "rb").read())
    pos, size = packets[3]
    mid = pos + size // 2
    data[mid : mid + 64] = bytes(64)  # zeros in the middle of frame 3's compressed image data (zlib stream)
    bad = tmp_path / "bad.avi"
    bad.write_bytes(bytes(data))
    clip = open_footage(bad)
    got = clip.read()
    assert [f.index for f in got] == [0, 1, 2, 4, 5, 6, 7]
    assert all(np.array_equal(f.rgb, frames[f.index]) for f in got)
    assert len(clip.info.broken) == 1 and clip.info.broken[0].startswith("frame 3: ")


def test_animated_gif(tmp_path):
    # GIF holds a palette: frames of at most 256 colours come back exactly (GIF89a, LZW is lossless)
    pal = np.array([[0, 0, 0], [255, 0, 0], [0, 255, 0], [10, 20, 200]], np.uint8)
    rng = np.random.default_rng(3)
    idx = [rng.integers(0, 4, (12, 16)) for _ in range(3)]
    imgs = [Image.fromarray(pal[i]) for i in idx]
    imgs[0].save(tmp_path / "a.gif", save_all=True, append_images=imgs[1:], duration=100, loop=0)
    got = open_footage(tmp_path / "a.gif").read()
    assert len(got) == 3
    assert all(np.array_equal(f.rgb, pal[i]) for f, i in zip(got, idx))


# -- the colour look-up: bit-exact with emulate -------------------------------------------
def _random_network(rng, n_in, bits, hidden, n_out, acts):
    layers, fan = [], n_in
    for width, act in zip([*hidden, n_out], acts):
        layers.append((rng.normal(0, 2.0, (width, fan)), rng.normal(0, 0.5, width), act))
        fan = width
    return Network.from_layers(layers, input_bits=bits)


def _random_plan(rng, net):
    layers = []
    for L in net.layers:
        d = {"weight_bits": int(rng.integers(3, 9)), "weight_frac": int(rng.integers(1, 6)),
             "acc_bits": int(rng.integers(5, 14)), "out_bits": int(rng.integers(3, 9)),
             "acc_overflow": str(rng.choice(["wrap", "saturate"])),
             "index_round": str(rng.choice(["floor", "half-even", "trunc"]))}  # fmt: skip
        if L.activation in ("sigmoid", "tanh"):
            d["table_bits"] = int(rng.integers(3, 9))
            d["table_frac"] = int(rng.integers(0, 5))
        else:
            d["out_frac"] = int(rng.integers(0, 5))
        layers.append(d)
    return Plan.from_dict({"kind": "fxnet.plan", "version": 1, "layers": layers})


@pytest.mark.parametrize("compiled", [True, False], ids=["compiled", "numpy"])
@pytest.mark.parametrize("seed", range(8))
def test_lookup_equals_emulate_on_every_colour(seed, compiled, monkeypatch):
    monkeypatch.setattr(build_module, "USE_COMPILED", compiled)
    if not compiled and seed % 2:  # steps 4-7 on every colour, not through the per-interval tables
        monkeypatch.setattr(build_module, "DOMAIN_MAX", 0)
    clear_lookup_cache()
    rng = np.random.default_rng(100 + seed)
    n_in, bits = [(3, 4), (2, 6), (3, 5), (1, 12)][seed % 4]
    acts = [("sigmoid", "sigmoid"), ("relu", "tanh"), ("tanh", "identity"), ("identity", "sigmoid")][seed // 2 % 4]
    n_out = 1 if seed % 3 else 3
    net = _random_network(rng, n_in, bits, [int(rng.integers(2, 5))], n_out, acts)
    plan = _random_plan(rng, net)
    lut = compile_lookup(net, plan, codes=True)
    colours = np.stack(np.unravel_index(np.arange(1 << (n_in * bits)), (1 << bits,) * n_in), axis=1)
    ref = emulate(net, plan, colours)
    idx = colour_index(colours.astype(np.uint16 if bits > 8 else np.uint8), bits, n_in)
    assert np.array_equal(idx, np.arange(1 << (n_in * bits)))  # input 0 in the most significant bits
    assert np.array_equal(lut.decisions, ref.decisions)
    assert lut.codes is not None and np.array_equal(lut.codes, ref.out_codes)
    # per-colour event bits: counts over any set of colours equal emulate's counts on them
    for sub in (idx, rng.choice(idx, 300), idx[:1], idx[-7:]):
        counts = lut.event_counts(sub)
        sub_ref = emulate(net, plan, colours[sub])
        for li, ev in enumerate(sub_ref.events):
            for name in ("acc_overflow", "table_low", "table_high"):
                for j, c in enumerate(ev[name].tolist()):
                    assert counts.get((li, j, name), 0) == c, (li, j, name)
    flt = compile_float_lookup(net)
    assert np.array_equal(flt.decisions, ref.float_decisions)


def test_lookup_rgb8_sampled_colours_and_fused_path():
    net = Network.load("assets/network.json")
    plan = Plan.load("assets/plan.json", net).replace(acc_bits=13, out_bits=5)
    lut = compile_lookup(net, plan)
    assert lut.size == 1 << 24 and lut.packed is not None and lut.packed.nbytes == 1 << 21
    rng = np.random.default_rng(5)
    frame = rng.integers(0, 256, (90, 160, 3), dtype=np.uint8)
    ref = emulate(net, plan, frame)
    assert np.array_equal(lut.decide(frame), ref.decisions)  # fused loop over the packed table
    assert np.array_equal(lut.decide_take(frame), ref.decisions)  # numpy index + take
    counts = lut.event_counts(lut.index(frame))
    for li, ev in enumerate(ref.events):
        for name in ("acc_overflow", "table_low", "table_high"):
            for j, c in enumerate(ev[name].tolist()):
                assert counts.get((li, j, name), 0) == c
    assert sum(counts.values()) > 0  # this plan has events
    assert compile_lookup(net, Plan.from_dict(plan.to_dict())) is lut  # cached by value
    # odd strides: a non-contiguous frame takes the numpy path, same decisions
    assert np.array_equal(lut.decide(frame[:, ::2]), ref.decisions[:, ::2])


def test_lookup_limits():
    net = Network.from_layers([(np.ones((1, 4)), [0.0], "sigmoid")], input_bits=8)
    plan = Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, table_bits=8, table_frac=4, out_bits=8)
    with pytest.raises(ValueError, match=r"^network inputs must total at most 24 bits for a colour look-up, not 32"):
        compile_lookup(net, plan)
    with pytest.raises(TypeError, match=r"^plan must be a Plan, not dict$"):
        compile_lookup(net, plan.to_dict())


# -- analysis ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo_clip(tmp_path_factory):
    return write_demo_clip(tmp_path_factory.mktemp("clip") / "belt.mkv", n_frames=12, width=96, height=64)


def test_demo_clip_round_trips_exactly(demo_clip):
    frames = demo_frames(12, 96, 64)
    got = open_footage(demo_clip).read()
    assert len(got) == 12 and all(np.array_equal(f.rgb, r) for f, r in zip(got, frames))


def test_analysis_matches_emulate_per_frame(demo_clip, tmp_path):
    net = Network.load("assets/network.json")
    plan = Plan.load("assets/plan.json", net).replace(acc_bits=13, out_bits=5)
    seen = []
    result = analyse_footage(net, plan, demo_clip, frames="0:12:2", progress=lambda d, t: seen.append((d, t)))
    assert seen == [(i, 6) for i in range(1, 7)]
    frames = demo_frames(12, 96, 64)
    for rec in result.frames:
        ref = emulate(net, plan, frames[rec["index"]])
        assert rec["differ"] == ref.mismatch
        assert rec["positive_fixed"] == int(np.count_nonzero(ref.decisions == 1))
        assert rec["positive_float"] == int(np.count_nonzero(ref.float_decisions == 1))
        for name in ("acc_overflow", "table_low", "table_high"):
            assert rec["events"][name] == [e[name].tolist() for e in ref.events]
        assert rec["mean_rgb"] == pytest.approx(frames[rec["index"]].reshape(-1, 3).mean(axis=0), abs=1e-4)
    assert [r["index"] for r in result.frames] == [0, 2, 4, 6, 8, 10]
    doc = json.loads(open(result.save(tmp_path / "out.json")).read())
    assert doc["kind"] == "fxnet.footage" and doc["version"] == 1 and len(doc["frames"]) == 6
    assert doc["totals"]["differ"] == sum(r["differ"] for r in result.frames)
    arrays = np.load(result.save(tmp_path / "out.npz"), allow_pickle=False)
    assert arrays["differ"].tolist() == [r["differ"] for r in result.frames]
    assert arrays["table_low_1"].shape == (6, 3)


def test_analysis_cancels(demo_clip):
    net = Network.load("assets/network.json")
    plan = Plan.load("assets/plan.json", net)
    stop = threading.Event()
    result = analyse_footage(net, plan, demo_clip, on_frame=lambda i, r: stop.set() if i == 2 else None, cancel=stop)
    assert result.cancelled and len(result.frames) == 3 and result.totals["cancelled"]


def test_analysis_needs_rgb8_network(demo_clip):
    net = Network.from_layers([(np.ones((1, 2)), [0.0], "sigmoid")], input_bits=8)
    plan = Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, table_bits=8, table_frac=4, out_bits=8)
    with pytest.raises(ValueError, match=r"^network must take 3 inputs of 8 bits \(RGB\) for footage, not 2 inputs"):
        analyse_footage(net, plan, demo_clip)


def teardown_module() -> None:
    clear_lookup_cache()


def test_label_masks_give_accuracy_per_frame(tmp_path):
    from fxnet_widgets.core.images import save_png

    net = Network.load("assets/network.json")
    plan = Plan.load("assets/plan.json", net).replace(acc_bits=13, out_bits=5)
    frames = demo_frames(4, 48, 32)
    (tmp_path / "f").mkdir()
    (tmp_path / "m").mkdir()
    for i, f in enumerate(frames):
        save_png(tmp_path / "f" / f"{i}.png", f)
        # the masks are the float network's own decisions: float accuracy must be exactly 1
        save_png(tmp_path / "m" / f"{i}.png", (emulate(net, plan, f).float_decisions * 255).astype(np.uint8))
    result = analyse_footage(net, plan, tmp_path / "f", labels=tmp_path / "m")
    for rec, f in zip(result.frames, frames):
        ref = emulate(net, plan, f)
        assert rec["accuracy_float"] == 1.0
        assert rec["accuracy_fixed"] == round(1 - ref.mismatch / f.shape[0] / f.shape[1], 6)
        assert rec["labelled_positive"] == int(ref.float_decisions.sum())
    assert result.totals["accuracy_float"] == 1.0 and "accuracy on the labels" in result.summary()
    (tmp_path / "m" / "3.png").unlink()
    with pytest.raises(ValueError, match=r"labels must have a mask for frame 3, not none$"):
        analyse_footage(net, plan, tmp_path / "f", labels=tmp_path / "m")


def test_overlay_video_marks_the_disagreement(demo_clip, tmp_path):
    from fxnet_widgets.core.footage.overlay import ONLY_FIXED, ONLY_FLOAT, overlay_frame

    net = Network.load("assets/network.json")
    plan = Plan.load("assets/plan.json", net).replace(acc_bits=13, out_bits=5)
    out = tmp_path / "overlay.mkv"
    analyse_footage(net, plan, demo_clip, frames="0:6", overlay=out)
    got = open_footage(out).read()  # FFV1 RGB: lossless, so the overlay comes back exactly
    frames = demo_frames(12, 96, 64)
    assert len(got) == 6
    for f in got:
        ref = emulate(net, plan, frames[f.index])
        want = overlay_frame(frames[f.index], ref.decisions, ref.float_decisions)
        assert np.array_equal(f.rgb, want)
        only_fixed = (ref.decisions == 1) & (ref.float_decisions == 0)
        only_float = (ref.decisions == 0) & (ref.float_decisions == 1)
        assert np.all(f.rgb[only_fixed] == ONLY_FIXED) and np.all(f.rgb[only_float] == ONLY_FLOAT)
    assert not list(tmp_path.glob(".*.tmp"))
    mp4 = tmp_path / "overlay.mp4"  # H.264 needs even sizes: 95 x 63 is padded
    odd = [np.ascontiguousarray(f[:63, :95]) for f in frames[:3]]
    for i, f in enumerate(odd):
        Image.fromarray(f).save(tmp_path / f"o{i}.png")
    analyse_footage(net, plan, str(tmp_path / "o*.png"), overlay=mp4)
    clip = open_footage(mp4)
    assert len(clip.read()) == 3 and (clip.info.width, clip.info.height) == (96, 64)


def test_split_over_workers_gives_the_same_records(demo_clip):
    from fxnet_widgets.core.analysis.search import SerialExecutor
    from fxnet_widgets.core.footage.parallel import analyse_footage_split, split_range

    assert split_range(0, 10, 3, 2) == ["0:4:3", "6:10:3"] and split_range(2, 3, 1, 5) == ["2:3:1"]
    net = Network.load("assets/network.json")
    plan = Plan.load("assets/plan.json", net).replace(acc_bits=13, out_bits=5)
    whole = analyse_footage(net, plan, demo_clip, frames="1:12:2")
    serial = analyse_footage_split(net, plan, demo_clip, SerialExecutor(), frames="1:12:2", parts=3)
    assert serial.frames == whole.frames and serial.totals == whole.totals
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            parts = analyse_footage_split(net, plan, demo_clip, client, frames="1:12:2")
    assert parts.frames == whole.frames and parts.to_dict() == whole.to_dict()


# -- the per-frame loop over the coded table: the same counts as emulate -------------------
@pytest.mark.parametrize("seed, hidden, kind", [(0, 0, "escape"), (1, 0, "escape+blocks"), (301, 0, "2-bit+blocks"),
                                                (302, 0, "escape+blocks"), (403, 6, "escape+blocks"),
                                                (402, 6, None)])  # fmt: skip
def test_frame_records_over_the_coded_table_equal_emulate(seed, hidden, kind):
    from fxnet_widgets.core.footage._coded import coded_table
    from fxnet_widgets.core.footage.analyse import _frame_record

    rng = np.random.default_rng(seed)
    if seed in (0, 1):  # the demo network: a narrow plan (30 values, wrapping sums: few uniform blocks), its plan
        net = Network.load("assets/network.json")
        plan = Plan.load("assets/plan.json", net)
        plan = plan.replace(acc_bits=13, out_bits=5) if seed == 0 else plan
    else:  # random RGB networks: 3 values (2 bits), 16-bit values, too many event slots (the byte tables)
        acts = ("sigmoid", "sigmoid") if seed == 301 else ("tanh", "sigmoid")
        net = _random_network(rng, 3, 8, [hidden or int(rng.integers(3, 6))], 1, acts)
        plan = _random_plan(rng, net)
    fixed, flt = compile_lookup(net, plan), compile_float_lookup(net)
    coded = coded_table(fixed, flt)
    got = None if coded is None else ("escape" if coded.escape is not None else "2-bit") + (
        "+blocks" if coded.blocks is not None else "")  # fmt: skip
    assert got == kind
    noisy = rng.integers(0, 256, (48, 80, 3), dtype=np.uint8)  # every pixel its own colour
    if coded is not None and coded.escape is not None:  # some pixels take the second read
        assert (coded.escape[fixed.index(noisy)] >= 3).any()
    if coded is not None and coded.blocks is not None:  # some pixels are in mixed blocks, some in uniform ones
        q = (noisy >> 2).astype(np.int64)
        in_block = coded.blocks[(q[..., 0] << 12) | (q[..., 1] << 6) | q[..., 2]]
        assert (in_block == 255).any() and (in_block != 255).any()
    for frame in (noisy, *demo_frames(3, 80, 48)):
        rec = _frame_record(fixed, flt, frame)
        ref = emulate(net, plan, frame)  # the reference: the kernel itself on the frame's pixels
        assert rec["differ"] == ref.mismatch
        assert rec["positive_fixed"] == int(np.count_nonzero(ref.decisions == 1))
        assert rec["positive_float"] == int(np.count_nonzero(ref.float_decisions == 1))
        for name in ("acc_overflow", "table_low", "table_high"):
            assert rec["events"][name] == [e[name].tolist() for e in ref.events]
        assert rec["mean_rgb"] == pytest.approx(frame.reshape(-1, 3).mean(axis=0), abs=1e-4)


# -- the float look-up: predict's decisions, float32 chunks checked against the float64 reference --
@pytest.mark.parametrize("seed", range(8))
def test_float_lookup_equals_predict_on_every_colour(seed):
    from fxnet_widgets.core.footage._float_build import _parts, error_bound, float32_chunk

    clear_lookup_cache()
    rng = np.random.default_rng(700 + seed)
    n_in, bits = [(3, 4), (2, 6), (3, 5), (1, 12)][seed % 4]
    acts = [("sigmoid", "sigmoid"), ("relu", "tanh"), ("tanh", "identity"), ("identity", "relu")][seed // 2 % 4]
    n_out = 1 if seed % 3 else 3
    net = _random_network(rng, n_in, bits, [int(rng.integers(2, 12))], n_out, acts)
    if seed % 2:  # inputs scaled by 1 / (2^bits - 1) (not exact in binary)
        net = Network.from_dict({**net.to_dict(), "input": {**net.to_dict()["input"], "scale": "full"}})
    assert net.input_scale == ("full" if seed % 2 else "pow2")
    colours = np.stack(np.unravel_index(np.arange(1 << (n_in * bits)), (1 << bits,) * n_in), axis=1)
    out64 = net.predict(colours)  # the reference of the semantics: float64 forward pass
    assert np.array_equal(compile_float_lookup(net).decisions, net.decide(out64))
    # the error bound holds on every colour (the float32 outputs against predict's float64 ones)
    low32, high32 = _parts(net)
    out32 = float32_chunk(net, low32, high32, 0, high32.shape[0]).T.astype(np.float64)
    assert np.all(np.abs(out32 - out64) <= error_bound(net)[None, :])


def test_float_lookup_on_the_boundary_and_rgb8_samples():
    clear_lookup_cache()
    # zero weights: every colour's output is sigmoid(0) = 0.5 exactly, the threshold: all go to predict
    flat = Network.from_layers([(np.zeros((1, 3)), [0.0], "sigmoid")], input_bits=4)
    assert flat.threshold == 0.5
    lut = compile_float_lookup(flat)
    assert lut.decisions.tolist() == [1] * 4096  # 0.5 >= 0.5 (Network.decide: ">= threshold")
    # three equal outputs: argmax ties go to the lowest index, as numpy.argmax (predict + decide)
    tie = Network.from_layers([(np.ones((3, 3)), [0.0] * 3, "identity")], input_bits=4)
    assert not compile_float_lookup(tie).decisions.any()
    # the demo network over 8-bit RGB: sampled colours against predict
    net = Network.load("assets/network.json")
    lut = compile_float_lookup(net)
    rng = np.random.default_rng(9)
    sample = rng.integers(0, 256, (200_000, 3))
    idx = (sample[:, 0] << 16) | (sample[:, 1] << 8) | sample[:, 2]
    assert np.array_equal(lut.decisions[idx], net.decide(net.predict(sample)))
