"""The demo asset set: two belt scenes, their ground truth, a trained network, a plan.

:func:`build_demo` renders the training scene (warm lamp) and the test scene
(cool, dimmer daylight from the other side), trains the demo 3-3-1 sigmoid
network on the training scene's ripe/other mask, derives the suggested plan and
measures both on the test scene. :func:`write_demo` writes the files; the
repository's ``assets/`` directory is exactly ``write_demo("assets",
class_maps=True)`` and a test regenerates it and compares.

The suggested plan (:func:`~fxnet_widgets.core.starting.suggest_plan`, the
rule of :mod:`fxnet_widgets.core.starting`) is derived, not searched: per layer
10-bit weights with the largest fraction that clips no weight, the
guaranteed-safe accumulator width (so no input can overflow), a 14-bit table
address covering sums in [-8, 8) and 8-bit outputs. It is a comfortable
starting point; cheaper plans are for the search to find.

Examples
--------
>>> demo = build_demo()  # doctest: +SKIP
>>> demo.float_accuracy > 0.97, demo.disagreement <= 0.01  # doctest: +SKIP
(True, True)
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .images import save_png
from .kernel import Emulation, emulate
from .labels import ClassTable, labels_from_mask
from .network import Network
from .plan import Plan
from .scenes import CLASS_COLOURS, CLASSES, Scene, make_scene
from .starting import suggest_plan
from .training import Training, train

__all__ = [
    "DEMO_SEEDS",
    "Demo",
    "build_demo",
    "suggest_plan",
    "write_demo",
    "demo_class_table",
    "DEMO_FILES",
    "DEMO_CLIP",
]

#: seeds of the demo: training scene, test scene, training
DEMO_SEEDS = {"train_scene": 1, "test_scene": 2, "training": 0}
#: training settings of the demo network
DEMO_TRAINING: dict[str, Any] = {"hidden": 3, "activation": "sigmoid", "n_samples": 40_000, "weight_decay": 2e-3}
#: files written by :func:`write_demo` (and ``fxnet demo``)
DEMO_FILES = (
    "network.json",
    "plan.json",
    "scene-train.png",
    "scene-train-mask.png",
    "scene-test.png",
    "scene-test-mask.png",
)
#: the generated belt clip (``clip=True``; ``fxnet demo`` writes it, ``assets/`` does not hold it)
DEMO_CLIP = "belt-clip.mkv"
#: extra files of ``assets/`` (``class_maps=True``)
CLASS_MAP_FILES = ("scene-train-classes.png", "scene-test-classes.png", "classes.json")


@dataclass(frozen=True, eq=False)
class Demo:
    """The demo scenario, built in memory."""

    train_scene: Scene
    test_scene: Scene
    training: Training
    plan: Plan
    emulation: Emulation

    @property
    def network(self) -> Network:
        return self.training.network

    @property
    def float_accuracy(self) -> float:
        """Float decisions vs the test scene's mask (fraction of pixels)."""
        truth = self.test_scene.mask == 255
        return float(np.mean(self.emulation.float_decisions.astype(bool) == truth))

    @property
    def fixed_accuracy(self) -> float:
        """Fixed-point decisions vs the test scene's mask."""
        truth = self.test_scene.mask == 255
        return float(np.mean(self.emulation.decisions.astype(bool) == truth))

    @property
    def disagreement(self) -> float:
        """Fraction of test pixels where the plan's decision differs from float."""
        return self.emulation.mismatch / self.emulation.n

    def summary_dict(self) -> dict[str, Any]:
        """JSON-ready figures of the demo."""
        return {
            "float_accuracy": self.float_accuracy,
            "fixed_accuracy": self.fixed_accuracy,
            "disagreement_pixels": self.emulation.mismatch,
            "disagreement": self.disagreement,
            "pixels": self.emulation.n,
            "events": self.emulation.event_totals(),
            "training": self.training.report.summary(),
        }

    def summary(self) -> str:
        """A few lines of text for the command line."""
        e = self.emulation
        overflows = e.event_totals()["acc_overflow"]
        shape = "-".join(map(str, self.network.shape))
        light = self.test_scene.lighting.name
        return "\n".join(
            [
                f"network {shape} sigmoid, {self.training.report.summary()}",
                f"test scene ({light}): float accuracy {100 * self.float_accuracy:.2f}% "
                f"of {e.n} pixels",
                f"plan: fixed-vs-float disagreement {e.mismatch} pixels "
                f"({100 * self.disagreement:.3f}%), "
                f"fixed accuracy {100 * self.fixed_accuracy:.2f}%, "
                f"accumulator overflows {overflows}",
            ]
        )


def demo_class_table() -> ClassTable:
    """The colour -> class table of the scenes' class maps (``classes.json``)."""
    return ClassTable(CLASSES, tuple(CLASS_COLOURS[c] for c in CLASSES))


def build_demo() -> Demo:
    """Render the scenes, train the network, derive the plan and measure it."""
    tr = make_scene(DEMO_SEEDS["train_scene"], "train")
    te = make_scene(DEMO_SEEDS["test_scene"], "test")
    pixels = labels_from_mask(tr.image, tr.mask, classes=("other", "ripe"))
    training = train(
        pixels, seed=DEMO_SEEDS["training"], input_names=("red", "green", "blue"), **DEMO_TRAINING
    )
    plan = suggest_plan(training.network)
    return Demo(tr, te, training, plan, emulate(training.network, plan, te.image))


def write_demo(
    directory: str | os.PathLike[str], *, class_maps: bool = False, demo: Demo | None = None,
    clip: bool = False,
) -> Demo:
    """Write :data:`DEMO_FILES` (and with ``class_maps`` the class maps and table, with ``clip``
    the belt clip :data:`DEMO_CLIP` of :func:`~fxnet_widgets.core.footage.write_demo_clip`).

    Every file is written atomically; the directory must exist.
    """
    d = Path(directory)
    if not d.is_dir():
        raise ValueError(f"directory must be an existing directory, not {os.fspath(directory)!r}")
    demo = build_demo() if demo is None else demo
    demo.network.save(d / "network.json")
    demo.plan.save(d / "plan.json")
    save_png(d / "scene-train.png", demo.train_scene.image)
    save_png(d / "scene-train-mask.png", demo.train_scene.mask)
    save_png(d / "scene-test.png", demo.test_scene.image)
    save_png(d / "scene-test-mask.png", demo.test_scene.mask)
    if class_maps:
        save_png(d / "scene-train-classes.png", demo.train_scene.class_map)
        save_png(d / "scene-test-classes.png", demo.test_scene.class_map)
        demo_class_table().save(d / "classes.json")
    if clip:
        from .footage import write_demo_clip

        write_demo_clip(d / DEMO_CLIP)
    return demo
