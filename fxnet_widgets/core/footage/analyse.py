"""Per-frame analysis of footage under one plan: positives, disagreement with float, events.

Both networks run as colour look-ups (:func:`~.lookup.compile_lookup` for the plan,
:func:`~.lookup.compile_float_lookup` for the float network, each built once and
cached by value), so a frame costs one pass over its pixels; decoding is timed
apart from the analysis.

The result (:class:`FootageAnalysis`) holds one record per decoded frame, in order::

    {"index": i, "time_s": t, "pixels": n, "positive_fixed": n, "positive_float": n,
     "differ": n, "events": {"acc_overflow": [[per neuron of layer 1], ...], "table_low": ..,
     "table_high": ..}, "mean_rgb": [r, g, b]}

``positive_*`` counts pixels whose decision is the positive class (class index 1 for
several outputs). Event counts are per pixel, as ``emulate`` counts them.
"""

from __future__ import annotations

import os
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..fileio import atomic_write_json, atomic_writer
from ..network import Network
from ..plan import Plan
from ._coded import coded_table
from .lookup import LOOKUP_EVENTS, ColourLookup, compile_float_lookup, compile_lookup
from .overlay import OverlayWriter, overlay_frame
from .reader import Footage, Frame, open_footage

__all__ = ["FootageAnalysis", "analyse_footage", "frame_decisions", "WORST_FRAMES"]

#: how many frames :attr:`FootageAnalysis.totals` lists as the worst
WORST_FRAMES = 5

Progress = Callable[[int, int], None]


def frame_decisions(fixed: ColourLookup, float_: ColourLookup, rgb: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fixed-point and float decisions (H x W uint8 class indices) of one frame, by look-up."""
    arr = np.ascontiguousarray(rgb)
    kern = _kernels_for(arr, fixed)
    if kern is not None:
        fx = np.empty(arr.shape[:-1], dtype=np.uint8)
        fl = np.empty(arr.shape[:-1], dtype=np.uint8)
        kern.both(arr.reshape(-1, 3), fixed.decisions, float_.decisions, fx.reshape(-1), fl.reshape(-1))
        return fx, fl
    idx = fixed.index(arr)
    return fixed.decisions.take(idx), float_.decisions.take(idx)


def _kernels_for(arr: np.ndarray, lut: ColourLookup) -> Any:
    from .lookup import _fast_rgb

    return _fast_rgb(arr, lut)


def _empty_events(network: Network) -> dict[str, list[list[int]]]:
    return {name: [[0] * L.n_out for L in network.layers] for name in LOOKUP_EVENTS}


def _frame_record(fixed: ColourLookup, flt: ColourLookup, rgb: np.ndarray) -> dict[str, Any]:
    arr = np.ascontiguousarray(rgb)
    n = int(arr.shape[0] * arr.shape[1])
    events = _empty_events(fixed.network)
    kern = _kernels_for(arr, fixed)
    coded = coded_table(fixed, flt) if kern is not None else None
    if kern is not None and coded is not None:  # most pixels: one read from 256 KB of colour blocks
        hist = np.zeros(256, dtype=np.int64)
        sums = np.zeros(3, dtype=np.int64)
        none = np.zeros(1, dtype=np.uint8)
        blocks = coded.blocks if coded.blocks is not None else none
        escape = coded.escape if coded.escape is not None else none
        kern.frame_codes(arr.reshape(-1, 3), blocks, coded.table, coded.log2_per_byte, escape, hist, sums)
        pos_fx, pos_fl, differ, counts = coded.counts(hist, len(fixed.event_slots))
        by_slot = {s: int(c) for s, c in zip(fixed.event_slots, counts.tolist())}
        mean = (sums / max(n, 1)).tolist()
    elif kern is not None:
        slots = fixed.event_slots
        ev = fixed.events if fixed.events is not None and slots else np.zeros(1, dtype=np.uint8)
        counts = np.zeros(max(1, len(slots)), dtype=np.int64)
        sums = np.zeros(3, dtype=np.int64)
        pos_fx, pos_fl, differ = kern.frame_stats(arr.reshape(-1, 3), fixed.decisions, flt.decisions, ev,
                                                   len(slots), counts, sums)  # fmt: skip
        by_slot = {s: int(c) for s, c in zip(slots, counts.tolist())}
        mean = (sums / max(n, 1)).tolist()
    else:
        idx = fixed.index(arr)
        fx, fl = fixed.decisions.take(idx), flt.decisions.take(idx)
        pos_fx, pos_fl = int(np.count_nonzero(fx == 1)), int(np.count_nonzero(fl == 1))
        differ = int(np.count_nonzero(fx != fl))
        by_slot = fixed.event_counts(idx)
        mean = (arr.reshape(n, -1).sum(axis=0, dtype=np.int64) / max(n, 1)).tolist()
    for (li, j, name), c in by_slot.items():
        events[name][li][j] = c
    return {
        "pixels": n, "positive_fixed": int(pos_fx), "positive_float": int(pos_fl), "differ": int(differ),
        "events": events, "mean_rgb": [round(float(v), 4) for v in mean],
    }  # fmt: skip


@dataclass
class FootageAnalysis:
    """Per-frame records of one source under one plan (see the module text), with totals.

    ``timing`` (seconds: look-up builds, decoding, analysis, and the analysis in CPU time of the
    analysing thread) varies between runs; everything else is deterministic.
    """

    source: dict[str, Any]
    plan: Plan
    network: Network
    frames: list[dict[str, Any]]
    cancelled: bool = False
    timing: dict[str, float] = field(default_factory=dict)
    #: the network whose float pass is "float" (None: ``network`` itself; a refined network's original)
    reference: Network | None = None

    @property
    def float_network(self) -> Network:
        """The network whose float decisions the records compare with."""
        return self.network if self.reference is None else self.reference

    @property
    def totals(self) -> dict[str, Any]:
        events = _empty_events(self.network)
        for rec in self.frames:
            for name, layers in rec["events"].items():
                for li, row in enumerate(layers):
                    for j, c in enumerate(row):
                        events[name][li][j] += c
        pixels = sum(r["pixels"] for r in self.frames)
        differ = sum(r["differ"] for r in self.frames)
        worst = sorted(self.frames, key=lambda r: (-r["differ"], r["index"]))[:WORST_FRAMES]
        return {
            "frames": len(self.frames), "pixels": pixels,
            "positive_fixed": sum(r["positive_fixed"] for r in self.frames),
            "positive_float": sum(r["positive_float"] for r in self.frames),
            "differ": differ, "differ_fraction": differ / pixels if pixels else 0.0,
            "events": {k: sum(sum(row) for row in v) for k, v in events.items()},
            "events_per_neuron": events,
            "worst_frames": [{"index": r["index"], "differ": r["differ"]} for r in worst if r["differ"]],
            **self._accuracy_totals(pixels),
            "broken_frames": list(self.source.get("broken", [])),
            "cancelled": self.cancelled,
        }  # fmt: skip

    def _accuracy_totals(self, pixels: int) -> dict[str, Any]:
        if not self.frames or "accuracy_fixed" not in self.frames[0]:
            return {}
        return {key: round(sum(r[key] * r["pixels"] for r in self.frames) / max(1, pixels), 6)
                for key in ("accuracy_fixed", "accuracy_float")}  # fmt: skip

    def series(self, key: str) -> np.ndarray:
        """One number per frame: ``"index"``, ``"time_s"``, ``"differ"``, ``"positive_fixed"``,
        ``"positive_float"``, ``"pixels"`` or ``"events"`` (every event of the frame)."""
        if key == "events":
            return np.array([sum(sum(sum(row) for row in v) for v in r["events"].values()) for r in self.frames],
                            dtype=np.int64)  # fmt: skip
        dtype = np.float64 if key in ("time_s", "accuracy_fixed", "accuracy_float") else np.int64
        return np.array([r[key] for r in self.frames], dtype=dtype)

    def to_dict(self) -> dict[str, Any]:
        """The ``fxnet.footage`` document (without ``timing``: it is not reproducible)."""
        return {"kind": "fxnet.footage", "version": 1, "source": self.source, "plan": self.plan.to_dict(),
                "frames": self.frames, "totals": self.totals}  # fmt: skip

    def npz_arrays(self) -> dict[str, np.ndarray]:
        """Per-frame arrays: the series, ``mean_rgb`` (F x 3) and ``<event>_<layer>`` (F x n_out_l)."""
        keys = ["index", "time_s", "pixels", "positive_fixed", "positive_float", "differ"]
        if self.frames and "accuracy_fixed" in self.frames[0]:
            keys += ["labelled_positive", "accuracy_fixed", "accuracy_float"]
        out = {k: self.series(k) for k in keys}
        out["mean_rgb"] = np.array([r["mean_rgb"] for r in self.frames], dtype=np.float64).reshape(-1, 3)
        for name in LOOKUP_EVENTS:
            for li, L in enumerate(self.network.layers):
                out[f"{name}_{li + 1}"] = np.array([r["events"][name][li] for r in self.frames],
                                                   dtype=np.int64).reshape(-1, L.n_out)  # fmt: skip
        return out

    def save(self, path: str | os.PathLike[str]) -> str:
        """Write ``.json`` (the document) or ``.npz`` (the arrays); returns the path."""
        p = os.fspath(path)
        if p.endswith(".npz"):
            arrays = self.npz_arrays()
            atomic_writer(p, lambda fh: np.savez(fh, **arrays))  # type: ignore[arg-type]
        elif p.endswith(".json"):
            atomic_write_json(p, self.to_dict())
        else:
            raise ValueError(f"output file name must end in .json or .npz, not {p!r}")
        return p

    def summary(self) -> str:
        """Deterministic text (for notebooks and the command line)."""
        t = self.totals
        lines = [
            f"footage {os.path.basename(str(self.source.get('source', '')))}: {t['frames']} frames"
            f"{' (cancelled)' if self.cancelled else ''}, {t['pixels']} pixels",
            f"  decisions differing from float: {t['differ']} ({100 * t['differ_fraction']:.4f} %)",
            f"  positive pixels: fixed {t['positive_fixed']}, float {t['positive_float']}",
            "  events: " + ", ".join(f"{k} {v}" for k, v in t["events"].items()),
        ]
        if "accuracy_fixed" in t:
            lines.append(f"  accuracy on the labels: fixed {100 * t['accuracy_fixed']:.3f} %, "
                         f"float {100 * t['accuracy_float']:.3f} %")  # fmt: skip
        if t["worst_frames"]:
            lines.append("  worst frames: " + ", ".join(f"{w['index']} ({w['differ']})" for w in t["worst_frames"]))
        for b in t["broken_frames"]:
            lines.append(f"  broken: {b}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return f"<FootageAnalysis {len(self.frames)} frames, {self.totals['differ']} pixels differ>"


class _Masks:
    """Label masks read in step with the frames, matched by frame index."""

    def __init__(self, clip: Footage) -> None:
        self.name = clip.info.source
        self._it = iter(clip)
        self._cur: Frame | None = None

    def mask(self, index: int, shape: tuple[int, ...]) -> np.ndarray:
        while self._cur is None or self._cur.index < index:
            self._cur = next(self._it, None)
            if self._cur is None:
                raise ValueError(f"{self.name}: labels must have a mask for frame {index}, not none")
        if self._cur.index != index:
            raise ValueError(f"{self.name}: labels must have a mask for frame {index}, not only for {self._cur.index}")
        m = self._cur.rgb
        if m.shape[:2] != tuple(shape):
            raise ValueError(f"{self.name}: mask of frame {index} must be {shape[1]}x{shape[0]}, "
                             f"not {m.shape[1]}x{m.shape[0]}")  # fmt: skip
        return np.asarray(m[..., 0] >= 128)


def _accuracy(fixed: ColourLookup, flt: ColourLookup, rgb: np.ndarray, positive: np.ndarray) -> dict[str, Any]:
    fx, fl = frame_decisions(fixed, flt, rgb)
    n = max(1, positive.size)
    return {
        "labelled_positive": int(np.count_nonzero(positive)),
        "accuracy_fixed": round(int(np.count_nonzero((fx == 1) == positive)) / n, 6),
        "accuracy_float": round(int(np.count_nonzero((fl == 1) == positive)) / n, 6),
    }


def _is_cancelled(cancel: Any) -> bool:
    if cancel is None:
        return False
    if isinstance(cancel, threading.Event):
        return cancel.is_set()
    return bool(cancel())


def analyse_footage(
    network: Network,
    plan: Plan,
    source: Footage | Sequence[Frame] | str | os.PathLike[str],
    *,
    frames: str | slice | None = None,
    progress: Progress | None = None,
    cancel: threading.Event | Callable[[], bool] | None = None,
    on_frame: Callable[[int, dict[str, Any]], None] | None = None,
    source_info: dict[str, Any] | None = None,
    labels: Footage | str | os.PathLike[str] | None = None,
    overlay: str | os.PathLike[str] | None = None,
    reference: Network | None = None,
) -> FootageAnalysis:
    """Analyse every frame of ``source``: a path for :func:`~.reader.open_footage`, a :class:`Footage`,
    or a list of decoded :class:`~.reader.Frame` (then ``source_info`` is the result's ``source``).

    Parameters
    ----------
    network, plan
        The float network (inputs of at most 24 bits in total; frames give 3 x 8 bits) and the plan.
    frames
        ``"A:B:S"`` range and stride (for a path).
    progress
        ``progress(done, total)`` after each frame (``total`` 0 when the length is unknown).
    cancel
        A ``threading.Event`` or a function; when set/true the analysis stops after the
        current frame and the result says ``cancelled``.
    on_frame
        Called with ``(position, record)`` after each frame.
    labels
        Label masks, one per frame (same frame indices: a video or an image folder, read with the
        same ``frames`` range): a pixel is positive (class 1) where the mask's first channel is at
        least 128. Each record then has ``labelled_positive``, ``accuracy_fixed`` and ``accuracy_float``.
    overlay
        Also write a video (``.mkv`` lossless or ``.mp4``) of the frames with the disagreement
        marked and the fixed mask outlined (:mod:`.overlay`).
    reference
        The network whose float pass is "float" (default ``network``): after a refine swap, the
        original network, so the records compare the refined integers with the trained model.
    """
    if network.n_in != 3 or network.input_bits != 8:
        raise ValueError(f"network must take 3 inputs of 8 bits (RGB) for footage, not {network.n_in} inputs of "
                         f"{network.input_bits} bits")  # fmt: skip
    held: Sequence[Frame] | None = None
    clip: Footage | None = None
    if isinstance(source, (list, tuple)):  # frames already decoded (a widget holds its clip)
        held = source
    elif isinstance(source, Footage):
        clip = source
    else:
        clip = open_footage(source, frames)  # type: ignore[arg-type]
    t0 = time.perf_counter()
    fixed = compile_lookup(network, plan)
    t1 = time.perf_counter()
    flt = compile_float_lookup(network if reference is None else reference)
    _frame_record(fixed, flt, np.zeros((1, 1, 3), np.uint8))  # compiles the fused loop before the clock starts
    t2 = time.perf_counter()
    total = 0
    if held is not None:
        total = len(held)
    elif clip is not None and clip.info.frames is not None:
        sl = clip.frames
        stop = clip.info.frames if sl.stop is None else min(sl.stop, clip.info.frames)
        total = max(0, -(-(stop - sl.start) // sl.step))
    records: list[dict[str, Any]] = []
    decode = analyse = analyse_cpu = 0.0
    cancelled = False
    it = iter(held) if held is not None else iter(clip) if clip is not None else iter(())
    masks = _Masks(labels if isinstance(labels, Footage) else open_footage(labels, frames)) if labels is not None \
        else None  # fmt: skip
    writer: OverlayWriter | None = None
    try:
        while True:
            if _is_cancelled(cancel):
                cancelled = True
                break
            ta = time.perf_counter()
            try:
                frame = next(it)
            except StopIteration:
                break
            tb, cb = time.perf_counter(), time.thread_time()
            rec = {"index": frame.index, "time_s": round(float(frame.time_s), 6),
                   **_frame_record(fixed, flt, frame.rgb)}  # fmt: skip
            if masks is not None:
                rec.update(_accuracy(fixed, flt, frame.rgb, masks.mask(frame.index, frame.rgb.shape[:2])))
            if overlay is not None:
                if writer is None:
                    rate = clip.info.rate if clip is not None else (source_info or {}).get("rate")
                    writer = OverlayWriter(overlay, frame.rgb.shape[1], frame.rgb.shape[0], rate)
                writer.write(overlay_frame(frame.rgb, *frame_decisions(fixed, flt, frame.rgb)))
            records.append(rec)
            tc = time.perf_counter()
            decode += tb - ta
            analyse += tc - tb
            analyse_cpu += time.thread_time() - cb
            if on_frame is not None:
                on_frame(len(records) - 1, rec)
            if progress is not None:
                progress(len(records), max(total, len(records)))
    except BaseException:
        if writer is not None:
            writer.close(keep=False)
        raise
    if writer is not None:
        writer.close()
    if progress is not None and total and len(records) < total and not cancelled:
        progress(len(records), len(records))  # fewer frames than announced: finish the bar
    timing = {"fixed_lookup_s": t1 - t0, "float_lookup_s": t2 - t1, "decode_s": decode, "analyse_s": analyse,
              "analyse_cpu_s": analyse_cpu}  # fmt: skip
    info = clip.info.to_dict() if clip is not None else dict(source_info or {})
    return FootageAnalysis(info, plan, network, records, cancelled, timing, reference)
