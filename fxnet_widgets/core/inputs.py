"""Input codes from a file: an image (RGB) or a ``.npy`` of unsigned codes (N x n_in).

The one loader of the command line and of :func:`~fxnet_widgets.core.export.export`;
errors name the file.

>>> import numpy as np, tempfile, os
>>> from fxnet_widgets.core.network import Network
>>> net = Network.from_layers([([[1.0, 1.0, 1.0]], [0.0], "sigmoid")])
>>> path = os.path.join(tempfile.mkdtemp(), "codes.npy")
>>> np.save(path, np.array([[1, 2, 3]], dtype=np.uint8))
>>> got = load_codes(path, net)
>>> got.codes.tolist(), got.source
([[1, 2, 3]], 'codes file codes.npy')
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from .fileio import load_npy
from .images import read_image
from .network import Network, as_codes

__all__ = ["LoadedCodes", "load_codes"]


@dataclass(frozen=True, eq=False)
class LoadedCodes:
    """Codes read from a file.

    Attributes
    ----------
    codes : H x W x 3 (an image, uint8) or N x n_in (a ``.npy``)
    note : the image reader's note of every conversion ("" when none)
    source : ``"image file NAME"`` (with the note) or ``"codes file NAME"``
    """

    codes: np.ndarray
    note: str
    source: str


def load_codes(path: str | os.PathLike[str], network: Network) -> LoadedCodes:
    """Read input codes for ``network`` from an image file or a ``.npy`` of codes."""
    name = os.fspath(path)
    if name.lower().endswith(".npy"):
        arr: Any = load_npy(name)
        try:
            if arr.ndim != 2:
                raise ValueError(f"codes must be N x {network.n_in}, not shape {arr.shape}")
            as_codes(arr, network.input_bits, network.n_in, what="codes")
        except (TypeError, ValueError) as exc:
            raise type(exc)(f"{name}: {exc}") from None
        return LoadedCodes(arr, "", f"codes file {os.path.basename(name)}")
    if not os.path.exists(name):
        raise FileNotFoundError(f"{name}: no such file")
    img = read_image(name)
    if network.n_in != 3 or network.input_bits != 8:
        raise ValueError(
            f"{name}: an image gives 3 inputs of 8 bits, but the network has {network.n_in} inputs of "
            f"{network.input_bits} bits (give a .npy of codes instead)"
        )
    note = f" ({img.note})" if img.note else ""
    return LoadedCodes(img.codes, img.note, f"image file {os.path.basename(name)}{note}")
