"""Error metrics of a fixed-point plan on data: how far it is from the float network.

Examples
--------
>>> import numpy as np
>>> from fxnet_widgets.core.network import Network
>>> from fxnet_widgets.core.plan import Plan
>>> from fxnet_widgets.core.kernel import emulate
>>> net = Network.from_layers([([[1.0, 1.0, 1.0]], [-1.0], "sigmoid")])
>>> plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18,
...                     table_bits=14, table_frac=10, out_bits=8)
>>> m = error_metrics(emulate(net, plan, np.array([[128, 128, 128], [0, 0, 0]])), labels=[1, 0])
>>> m.mismatch, m.accuracy, m.confusion
(0, 1.0, ((1, 0), (0, 1)))
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..kernel import Emulation, _compiled
from ..kernel.emulation import class_dtype

__all__ = ["ErrorMetrics", "error_metrics", "output_errors", "check_labels", "pair_counts"]


def check_labels(
    labels: Any, n: int, shape: tuple[int, ...] | None, n_classes: int, what: str = "labels"
) -> np.ndarray:
    """Validate class labels for ``n`` samples; return them flat, in the narrowest unsigned type
    that holds every class index (uint8 up to 256 classes, as ``Emulation.decisions``).

    Accepted: ``n`` integers (or an ``H x W`` array for an image of that shape),
    booleans counting as 0/1, each in ``[0, n_classes)``.
    """
    arr = np.asarray(labels)
    if arr.dtype == np.bool_:
        arr = arr.astype(np.int64)
    if arr.dtype.kind not in "iu":
        raise TypeError(f"{what} must be an array of integer class indices, not {arr.dtype}")
    if not (arr.shape == (n,) or (shape is not None and arr.shape == tuple(shape))):
        want = f"({n},)" if shape is None else f"({n},) or {tuple(shape)}"
        raise ValueError(f"{what} must have shape {want} (one per sample), not {arr.shape}")
    if arr.size:
        lo, hi = int(arr.min()), int(arr.max())
        if lo < 0 or hi >= n_classes:
            bad = lo if lo < 0 else hi
            raise ValueError(f"{what} must be between 0 and {n_classes - 1} (class indices), not {bad}")
    # one copy, checked first: every value fits (a strided view is not copied twice)
    return arr.astype(class_dtype(n_classes)).reshape(-1)


@dataclass(frozen=True, eq=False)
class ErrorMetrics:
    """Error of a fixed-point result against the float network (and labels).

    Attributes
    ----------
    n : number of samples
    mismatch, mismatch_fraction : decisions that differ from float (count, fraction)
    out_frac : fraction bits of the output codes (one output LSB is ``2**-out_frac``)
    max_abs_error, mean_abs_error : per output, ``|code / 2**out_frac - float|``
    max_abs_error_lsb, mean_abs_error_lsb : the same in output LSBs
    accuracy, float_accuracy : fraction of decisions equal to the labels (None without labels)
    confusion : rows the true class, columns the fixed-point decision (None without labels)
    classes : class names, in index order
    per_sample_error : per sample, the largest absolute output error (image-shaped for images)
    events : event totals of the result
    """

    n: int
    mismatch: int
    mismatch_fraction: float
    out_frac: int
    max_abs_error: tuple[float, ...]
    mean_abs_error: tuple[float, ...]
    max_abs_error_lsb: tuple[float, ...]
    mean_abs_error_lsb: tuple[float, ...]
    accuracy: float | None
    float_accuracy: float | None
    confusion: tuple[tuple[int, ...], ...] | None
    classes: tuple[str, ...]
    per_sample_error: np.ndarray
    events: dict[str, int]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready scalars (the per-sample array is left out)."""
        return {
            "samples": self.n,
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch_fraction,
            "out_frac": self.out_frac,
            "max_abs_error": list(self.max_abs_error),
            "mean_abs_error": list(self.mean_abs_error),
            "max_abs_error_lsb": list(self.max_abs_error_lsb),
            "mean_abs_error_lsb": list(self.mean_abs_error_lsb),
            "accuracy": self.accuracy,
            "float_accuracy": self.float_accuracy,
            "confusion": [list(r) for r in self.confusion] if self.confusion is not None else None,
            "classes": list(self.classes),
            "events": dict(self.events),
        }

    def summary(self) -> str:
        """Deterministic text summary."""
        lines = [
            f"{self.n} samples: {self.mismatch} decisions differ from float ({100 * self.mismatch_fraction:.3f} %)"
        ]
        for i, (mx, mn, mxl, mnl) in enumerate(
            zip(self.max_abs_error, self.mean_abs_error, self.max_abs_error_lsb, self.mean_abs_error_lsb)
        ):
            lines.append(
                f"  output {i}: max |error| {mx:.6g} ({mxl:.3f} LSB), mean |error| {mn:.6g} ({mnl:.3f} LSB)"
            )
        if self.accuracy is not None:
            lines.append(f"  accuracy against labels: fixed {self.accuracy:.5f}, float {self.float_accuracy:.5f}")
            assert self.confusion is not None
            width = max(len(c) for c in self.classes)
            lines.append("  confusion (rows: label, columns: fixed-point decision):")
            lines.append("    " + " " * width + " " + " ".join(f"{c:>{max(width, 8)}}" for c in self.classes))
            for c, row in zip(self.classes, self.confusion):
                lines.append(f"    {c:>{width}} " + " ".join(f"{v:>{max(width, 8)}d}" for v in row))
        ev = ", ".join(f"{k} {v}" for k, v in self.events.items())
        lines.append(f"  events: {ev}")
        return "\n".join(lines)


_LUT_CODES = 1 << 16  # output code ranges up to this size go through a value table
_CHUNK = 1 << 20  # samples per step of the chunked passes (bounded temporaries on a large frame)


def pair_counts(rows: np.ndarray, cols: np.ndarray, k: int) -> np.ndarray:
    """The k x k counts of the pairs ``(rows[i], cols[i])`` (class indices below ``k``), chunk by chunk.

    >>> pair_counts(np.array([0, 1, 1, 1]), np.array([0, 1, 0, 1]), 2).tolist()
    [[1, 0], [1, 2]]
    >>> pair_counts(np.array([0, 1, 1, 1], np.uint8), np.array([0, 1, 0, 1], np.uint8), 2).tolist()
    [[1, 0], [1, 2]]
    """
    rows, cols = np.asarray(rows).reshape(-1), np.asarray(cols).reshape(-1)
    if k == 2 and rows.dtype.kind in "biu" and cols.dtype.kind in "biu":  # two classes (0 and 1): three counts,
        # no pair index (an int16 label array included: no int64 copy of it)
        n, r1, c1 = rows.shape[0], int(np.count_nonzero(rows)), int(np.count_nonzero(cols))
        both = sum(int(np.count_nonzero(rows[a : a + _CHUNK] & cols[a : a + _CHUNK]))
                   for a in range(0, n, _CHUNK))  # fmt: skip
        return np.array([[n - r1 - c1 + both, c1 - both], [r1 - both, both]], dtype=np.int64)
    out = np.zeros(k * k, dtype=np.int64)
    for a in range(0, rows.shape[0], _CHUNK):
        pair = rows[a : a + _CHUNK].astype(np.int64)
        pair *= k
        pair += cols[a : a + _CHUNK]
        out += np.bincount(pair, minlength=k * k)
    return out.reshape(k, k)


def _abs_errors(result: Emulation, last: Any, out_frac: int) -> np.ndarray:
    """``|code / 2**out_frac - float output|`` as an (N, n_out) float64 array.

    Each code's real value comes from a table over the code range (the same
    ``ldexp`` per value, so the same float64 bits), one output column at a time.
    """
    n = result.n
    ref = np.asarray(result.float_out, dtype=np.float64).reshape(n, -1)
    lo, hi = int(last.code_min), int(last.code_max)
    n_out = ref.shape[1]
    if hi - lo >= _LUT_CODES or n == 0:
        fixed = np.ldexp(np.asarray(result.out_codes, dtype=np.float64).reshape(n, -1), -out_frac)
        return np.abs(fixed - ref)
    table = np.ldexp(np.arange(lo, hi + 1, dtype=np.float64), -out_frac)
    li = len(result.integer_network.layers) - 1
    err = np.empty((n, n_out), dtype=np.float64) if n_out > 1 else None
    kern = _compiled.kernels() if _compiled.use_compiled(n) else None
    for j in range(n_out):
        codes = result.neuron_codes(li, j)
        col = np.empty(n, dtype=np.float64)
        if kern is not None:  # the same float64 operations, fused in one pass (FXNET_KERNEL=numpy: below)
            kern.abs_error(codes, lo, table, ref[:, j], col)
            if err is None:
                return col.reshape(n, 1)
            err[:, j] = col
            continue
        for a in range(0, n, _CHUNK):  # take copies its index to intp: a chunk at a time, not 8 bytes a sample
            b = min(a + _CHUNK, n)
            c = codes[a:b]
            table.take(c if lo == 0 else c.astype(np.int64) - lo, out=col[a:b])
        np.subtract(col, ref[:, j], out=col)
        np.abs(col, out=col)
        if err is None:
            return col.reshape(n, 1)
        err[:, j] = col
    assert err is not None
    return err


def output_errors(result: Emulation) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """``(err, largest, mean, out_frac)``: the N x n_out output errors ``|code / 2**out_frac - float|``,
    their largest and mean per output (zeros without samples) and the output's fraction bits.

    One definition for :func:`error_metrics` and the search's per-plan records.
    """
    last = result.integer_network.layers[-1]
    out_frac = int(last.out_frac)
    err = _abs_errors(result, last, out_frac)
    if result.n:
        return err, err.max(axis=0), err.mean(axis=0), out_frac
    zeros = np.zeros(err.shape[1])
    return err, zeros, zeros, out_frac


def error_metrics(result: Emulation, labels: Any = None) -> ErrorMetrics:
    """Error metrics of an emulation result against float (and against ``labels``).

    Parameters
    ----------
    result
        An :class:`~fxnet_widgets.core.kernel.Emulation`.
    labels
        Optional class indices, one per sample (``N`` or the image's ``H x W``).

    Returns
    -------
    ErrorMetrics
        The output error is ``|code / 2**out_frac - float output|`` per output;
        in LSBs it is that times ``2**out_frac``.
    """
    if not isinstance(result, Emulation):
        raise TypeError(f"result must be an Emulation, not {type(result).__name__}")
    net = result.network
    n = result.n
    err, mx, mn, out_frac = output_errors(result)
    dec = np.asarray(result.decisions).reshape(-1)
    fdec = np.asarray(result.float_decisions).reshape(-1)
    mismatch = int(np.count_nonzero(dec != fdec))
    per_sample: np.ndarray
    if err.shape[1] == 1:
        per_sample = err.reshape(n)  # the largest of one value is the value itself
    else:
        per_sample = err.max(axis=1) if err.shape[1] else np.zeros(n)
    per_sample = per_sample.reshape(result.shape) if result.shape is not None else per_sample
    per_sample.setflags(write=False)
    accuracy = float_accuracy = None
    confusion = None
    if labels is not None:
        k = len(net.classes)
        lab = check_labels(labels, n, result.shape, k)
        accuracy = float(np.count_nonzero(dec == lab) / n) if n else 0.0
        float_accuracy = float(np.count_nonzero(fdec == lab) / n) if n else 0.0
        cm = pair_counts(lab, dec, k)
        confusion = tuple(tuple(int(v) for v in row) for row in cm)
    scale = 2.0**out_frac
    return ErrorMetrics(
        n=n,
        mismatch=mismatch,
        mismatch_fraction=mismatch / n if n else 0.0,
        out_frac=out_frac,
        max_abs_error=tuple(float(v) for v in mx),
        mean_abs_error=tuple(float(v) for v in mn),
        max_abs_error_lsb=tuple(float(v * scale) for v in mx),
        mean_abs_error_lsb=tuple(float(v * scale) for v in mn),
        accuracy=accuracy,
        float_accuracy=float_accuracy,
        confusion=confusion,
        classes=tuple(net.classes),
        per_sample_error=per_sample,
        events=result.event_totals(),
    )
