"""Training speed: 100,000 pixel samples, 3 hidden sigmoid units (target: a few seconds).

Prints wall times measured in this run and their ratios: per-epoch cost, scaling
from 10k to 100k samples, and scikit-learn's MLPClassifier on the same samples and
epoch count as a reference. Run: ``python benchmarks/bench_training.py``.
"""

from __future__ import annotations

import time
import warnings

from fxnet_widgets.core.labels import labels_from_mask, sample_pixels
from fxnet_widgets.core.scenes import make_scene
from fxnet_widgets.core.training import fit


def _time(split, **kw):
    t0 = time.perf_counter()
    t = fit(split.train_codes, split.train_labels, split.val_codes, split.val_labels, classes=split.classes, **kw)
    return time.perf_counter() - t0, t


def main() -> None:
    scene = make_scene(1, "train")
    pixels = labels_from_mask(scene.image, scene.mask, classes=("other", "ripe"))
    big = sample_pixels(pixels, 100_000, seed=0)
    small = sample_pixels(pixels, 10_000, seed=0)
    t_big, r_big = _time(big, seed=0)
    t_fixed, _ = _time(big, seed=0, max_epochs=20, patience=1000)
    t_small, _ = _time(small, seed=0, max_epochs=20, patience=1000)
    rep = r_big.report
    print(f"100k samples, 3 hidden: {t_big:.2f} s, {rep.epochs} epochs (early stop), "
          f"val accuracy {100 * rep.val_accuracy:.2f}%")  # fmt: skip
    print(
        f"per epoch at 100k: {1000 * t_fixed / 20:.1f} ms; 100k / 10k time ratio (20 epochs): {t_fixed / t_small:.2f}"
    )
    try:
        from sklearn.exceptions import ConvergenceWarning
        from sklearn.neural_network import MLPClassifier
    except ImportError:  # pragma: no cover
        return
    x = big.train_codes / 256.0
    model = MLPClassifier((3,), activation="logistic", solver="adam", batch_size=256, max_iter=20, tol=0,
                          n_iter_no_change=1000, random_state=0)  # fmt: skip
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        model.fit(x, big.train_labels)
    t_sk = time.perf_counter() - t0
    print(
        f"scikit-learn MLPClassifier, same 80k samples, 20 epochs: {t_sk:.2f} s; ours / sklearn: {t_fixed / t_sk:.2f}"
    )


if __name__ == "__main__":
    main()
