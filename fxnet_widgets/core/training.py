"""Training a small pixel classifier (numpy only, deterministic by seed).

An MLP with ``hidden`` units per hidden layer (sigmoid, tanh or relu) and

* two classes: one sigmoid output (the probability of the second class),
  trained with binary cross-entropy; decision ``output >= 0.5``;
* several classes: one identity output per class, trained with softmax
  cross-entropy. The contract has no softmax activation, and none is needed:
  softmax is monotonic, so the argmax decision of the identity outputs is the
  decision of the probabilities (apply a softmax to ``Network.predict`` to get them).

Inputs are scaled exactly as the contract says (code / 2**bits, ``pow2``). For
good conditioning the optimiser sees standardised inputs; the standardisation
is folded into the first layer at the end (``W' = W / sd``, ``b' = b - W' mu``),
so the returned :class:`~fxnet_widgets.core.network.Network` takes plain codes.
Mini-batch Adam (Kingma & Ba, 2015), L2 weight decay (keeps the weights small,
which suits fixed point), early stopping on the validation loss (the best epoch's
weights are returned).

Examples
--------
>>> rng = np.random.default_rng(0)
>>> codes = rng.integers(0, 256, (2000, 3)).astype(np.uint8)
>>> labels = (codes[:, 0].astype(int) > codes[:, 1].astype(int) + 40).astype(int)
>>> t = fit(codes[:1600], labels[:1600], codes[1600:], labels[1600:], classes=("other", "red"))
>>> t.network.shape, t.report.val_accuracy > 0.95
((3, 3, 1), True)
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from .labels import LabelledPixels, PixelSplit, sample_pixels
from .network import Network, activate

__all__ = ["TrainingReport", "Training", "fit", "train", "HIDDEN_ACTIVATIONS"]

HIDDEN_ACTIVATIONS = ("sigmoid", "tanh", "relu")


@dataclass(frozen=True)
class TrainingReport:
    """What happened during training (all values deterministic by seed).

    Attributes
    ----------
    train_loss, val_loss : tuple of float
        Mean loss per epoch on the training and validation sets.
    epochs : int
        Epochs run.
    best_epoch : int
        1-based epoch whose weights were kept (lowest validation loss).
    stopped_early : bool
        True when training stopped for lack of validation progress.
    train_accuracy, val_accuracy : float
        Decision accuracy of the returned network.
    n_train, n_val : int
        Sample counts.
    """

    train_loss: tuple[float, ...]
    val_loss: tuple[float, ...]
    epochs: int
    best_epoch: int
    stopped_early: bool
    train_accuracy: float
    val_accuracy: float
    n_train: int
    n_val: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready copy."""
        d = asdict(self)
        d["train_loss"] = list(self.train_loss)
        d["val_loss"] = list(self.val_loss)
        return d

    def summary(self) -> str:
        """One line of text."""
        how = "stopped early" if self.stopped_early else "ran all epochs"
        return (
            f"trained {self.epochs} epochs ({how}; kept epoch {self.best_epoch}): "
            f"train accuracy {100 * self.train_accuracy:.2f}% ({self.n_train} samples), "
            f"validation accuracy {100 * self.val_accuracy:.2f}% ({self.n_val} samples)"
        )


@dataclass(frozen=True, eq=False)
class Training:
    """A trained network and its report."""

    network: Network
    report: TrainingReport


def _dact(h: np.ndarray, activation: str) -> np.ndarray:
    """Derivative of the activation, written in terms of its output ``h``."""
    if activation == "sigmoid":
        return h * (1 - h)
    if activation == "tanh":
        return 1 - h * h
    return (h > 0).astype(np.float64)


def _check_data(
    codes: Any, labels: Any, n_classes: int, bits: int, what: str
) -> tuple[np.ndarray, np.ndarray]:
    c = np.asarray(codes)
    y = np.asarray(labels)
    if c.dtype.kind not in "iu" or c.dtype == np.bool_:
        raise TypeError(f"{what} codes must be unsigned integer codes, not {c.dtype}")
    if c.ndim != 2 or c.shape[0] == 0:
        raise ValueError(f"{what} codes must be N x n_in with N >= 1, not shape {c.shape}")
    if c.min() < 0 or c.max() > (1 << bits) - 1:
        raise ValueError(
            f"{what} codes must be between 0 and {(1 << bits) - 1}, "
            f"not {int(c.min())}..{int(c.max())}"
        )
    if y.dtype.kind not in "iu" or y.dtype == np.bool_:
        raise TypeError(f"{what} labels must be integer class indices, not {y.dtype}")
    if y.shape != (c.shape[0],):
        raise ValueError(f"{what} labels must have shape ({c.shape[0]},), not {y.shape}")
    if y.min() < 0 or y.max() >= n_classes:
        raise ValueError(
            f"{what} labels must be between 0 and {n_classes - 1}, "
            f"not {int(y.min())}..{int(y.max())}"
        )
    return c, y.astype(np.int64)


def fit(
    train_codes: Any,
    train_labels: Any,
    val_codes: Any,
    val_labels: Any,
    *,
    classes: Sequence[str],
    hidden: int | Sequence[int] = 3,
    activation: str = "sigmoid",
    seed: int = 0,
    input_bits: int = 8,
    input_names: Sequence[str] | None = None,
    max_epochs: int = 150,
    batch_size: int = 256,
    learning_rate: float = 0.01,
    weight_decay: float = 1e-3,
    patience: int = 8,
) -> Training:
    """Train an MLP on given training and validation samples.

    Parameters
    ----------
    train_codes, val_codes : array_like
        N x n_in unsigned input codes of ``input_bits`` bits.
    train_labels, val_labels : array_like
        N class indices into ``classes``.
    classes : sequence of str
        Class names; two classes give one sigmoid output, more give one identity
        (softmax-trained) output per class.
    hidden : int or sequence of int
        Units of each hidden layer (``3`` = one hidden layer of 3; ``()`` = none).
    activation : str
        Hidden activation: sigmoid, tanh or relu.
    seed : int
        Seed of the initial weights and of the batch order.
    max_epochs, batch_size, learning_rate, weight_decay, patience : number
        Adam settings; training stops after ``patience`` epochs without a lower
        validation loss.

    Returns
    -------
    Training
        The network (best validation epoch) and its report.
    """
    if activation not in HIDDEN_ACTIVATIONS:
        raise ValueError(
            f"activation must be one of {', '.join(HIDDEN_ACTIVATIONS)}, not {activation!r}"
        )
    classes = tuple(classes)
    if len(classes) < 2:
        raise ValueError(f"classes must name at least 2 classes, not {len(classes)}")
    sizes = [hidden] if isinstance(hidden, int) else list(hidden)
    for hsize in sizes:
        if not isinstance(hsize, int) or isinstance(hsize, bool) or not 1 <= hsize <= 4096:
            raise ValueError(f"hidden units must be integers between 1 and 4096, not {hsize!r}")
    for name, v, lo in (
        ("max_epochs", max_epochs, 1),
        ("batch_size", batch_size, 1),
        ("patience", patience, 1),
    ):
        if not isinstance(v, int) or isinstance(v, bool) or v < lo:
            raise ValueError(f"{name} must be an integer of at least {lo}, not {v!r}")
    k = len(classes)
    xtr, ytr = _check_data(train_codes, train_labels, k, input_bits, "training")
    xva, yva = _check_data(val_codes, val_labels, k, input_bits, "validation")
    if xva.shape[1] != xtr.shape[1]:
        raise ValueError(f"validation codes must have {xtr.shape[1]} columns, not {xva.shape[1]}")
    scale = 2.0**-input_bits
    rng = np.random.default_rng(seed)
    xt = xtr.astype(np.float64) * scale
    xv = xva.astype(np.float64) * scale
    mu = xt.mean(axis=0)
    sd = xt.std(axis=0)
    sd = np.where(sd > 1e-12, sd, 1.0)
    zt, zv = (xt - mu) / sd, (xv - mu) / sd
    n_out = 1 if k == 2 else k
    dims = [xt.shape[1], *sizes, n_out]
    params: list[np.ndarray] = []
    for a, b in zip(dims[:-1], dims[1:], strict=False):
        limit = np.sqrt(6.0 / (a + b))  # Glorot & Bengio (2010) uniform initialisation
        params += [rng.uniform(-limit, limit, (b, a)), np.zeros(b)]
    acts = [activation] * len(sizes)

    def targets(y: np.ndarray) -> np.ndarray:
        return y[:, None].astype(np.float64) if n_out == 1 else np.eye(k)[y]

    ttr, tva = targets(ytr), targets(yva)

    def forward(z: np.ndarray, ps: list[np.ndarray]) -> list[np.ndarray]:
        hs = [z]
        for li in range(len(acts)):
            hs.append(activate(hs[-1] @ ps[2 * li].T + ps[2 * li + 1], acts[li]))
        logits = hs[-1] @ ps[-2].T + ps[-1]
        if n_out == 1:
            hs.append(activate(logits, "sigmoid"))
        else:
            e = np.exp(logits - logits.max(axis=1, keepdims=True))
            hs.append(e / e.sum(axis=1, keepdims=True))
        return hs

    def loss(p: np.ndarray, t: np.ndarray) -> float:
        p = np.clip(p, 1e-12, 1 - 1e-12)
        if n_out == 1:
            return float(-np.mean(t * np.log(p) + (1 - t) * np.log(1 - p)))
        return float(-np.mean(np.sum(t * np.log(p), axis=1)))

    mom = [np.zeros_like(p) for p in params]
    vel = [np.zeros_like(p) for p in params]
    b1, b2, eps = 0.9, 0.999, 1e-8
    step = 0
    best = (np.inf, [p.copy() for p in params], 0)
    train_loss: list[float] = []
    val_loss: list[float] = []
    since = 0
    stopped = False
    n = zt.shape[0]
    epoch = 0
    for epoch in range(1, max_epochs + 1):
        order = rng.permutation(n)
        for start in range(0, n, batch_size):
            idx = order[start : start + batch_size]
            hs = forward(zt[idx], params)
            delta = (hs[-1] - ttr[idx]) / len(idx)  # dLoss/dlogits for both output kinds
            grads: list[np.ndarray] = [np.empty(0)] * len(params)
            for li in range(len(dims) - 2, -1, -1):
                grads[2 * li] = delta.T @ hs[li] + weight_decay * params[2 * li]
                grads[2 * li + 1] = delta.sum(axis=0)
                if li:
                    delta = (delta @ params[2 * li]) * _dact(hs[li], acts[li - 1])
            step += 1
            c1, c2 = 1 - b1**step, 1 - b2**step
            for j, g in enumerate(grads):
                mom[j] = b1 * mom[j] + (1 - b1) * g
                vel[j] = b2 * vel[j] + (1 - b2) * g * g
                params[j] = params[j] - learning_rate * (mom[j] / c1) / (np.sqrt(vel[j] / c2) + eps)
        train_loss.append(loss(forward(zt, params)[-1], ttr))
        val_loss.append(loss(forward(zv, params)[-1], tva))
        if val_loss[-1] < best[0] - 1e-6:
            best = (val_loss[-1], [p.copy() for p in params], epoch)
            since = 0
        else:
            since += 1
            if since >= patience:
                stopped = True
                break
    ps = best[1]
    # fold the standardisation into the first layer: W (x - mu) / sd + b
    w1 = ps[0] / sd
    b1v = ps[1] - w1 @ mu
    layers = [(w1, b1v)] + [(ps[2 * i], ps[2 * i + 1]) for i in range(1, len(dims) - 1)]
    out_act = "sigmoid" if n_out == 1 else "identity"
    net = Network.from_layers(
        [(w, b, a) for (w, b), a in zip(layers, [*acts, out_act], strict=False)],
        input_names=input_names,
        input_bits=input_bits,
        input_scale="pow2",
        classes=classes,
    )
    acc_tr = float(np.mean(net.decide(net.predict(xtr)) == ytr))
    acc_va = float(np.mean(net.decide(net.predict(xva)) == yva))
    report = TrainingReport(
        tuple(train_loss),
        tuple(val_loss),
        epoch,
        best[2],
        stopped,
        acc_tr,
        acc_va,
        int(n),
        int(xva.shape[0]),
    )
    return Training(net, report)


def train(
    data: LabelledPixels | PixelSplit,
    *,
    hidden: int | Sequence[int] = 3,
    activation: str = "sigmoid",
    seed: int = 0,
    n_samples: int = 100_000,
    validation: float = 0.2,
    balance: bool = True,
    input_names: Sequence[str] | None = ("red", "green", "blue"),
    **options: Any,
) -> Training:
    """Train a pixel classifier on labelled pixels.

    Parameters
    ----------
    data : LabelledPixels or PixelSplit
        Labelled pixels (sampled here with :func:`~fxnet_widgets.core.labels.sample_pixels`:
        ``n_samples``, ``validation``, ``balance``, ``seed``) or a ready split.
    hidden, activation, seed
        As :func:`fit`.
    options
        Further :func:`fit` settings (``max_epochs``, ``learning_rate``...).

    Examples
    --------
    >>> from fxnet_widgets.core.labels import labels_from_mask
    >>> img = np.zeros((20, 20, 3), np.uint8); img[:, 10:, 0] = 220; img[:, :10, 1] = 180
    >>> mask = np.zeros((20, 20), np.uint8); mask[:, 10:] = 255
    >>> t = train(labels_from_mask(img, mask, classes=("other", "ripe")), n_samples=2000)
    >>> t.report.val_accuracy
    1.0
    """
    if isinstance(data, LabelledPixels):
        split = sample_pixels(data, n_samples, validation=validation, balance=balance, seed=seed)
    elif isinstance(data, PixelSplit):
        split = data
    else:
        raise TypeError(f"data must be LabelledPixels or a PixelSplit, not {type(data).__name__}")
    names = (
        input_names
        if input_names is not None and len(input_names) == split.train_codes.shape[1]
        else None
    )
    return fit(
        split.train_codes,
        split.train_labels,
        split.val_codes,
        split.val_labels,
        classes=split.classes,
        hidden=hidden,
        activation=activation,
        seed=seed,
        input_names=names,
        **options,
    )
