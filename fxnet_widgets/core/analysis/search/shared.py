"""Input codes for a local pool's workers through one shared-memory block, read once per worker.

A sweep cuts its plans into a few chunks per worker. Sending the codes with every chunk
pickles, copies and hashes them once per chunk; here the driver writes them once into a
:class:`multiprocessing.shared_memory.SharedMemory` block and each chunk carries only a
small :class:`SharedCodes` handle (the block's name, shape, dtype and a digest of the
bytes). A worker copies the block the first time it sees a digest and keeps that copy
(:data:`KEEP` of them), so later chunks and later sweeps on the same data read nothing.
The driver unlinks the block when the evaluation ends. Only used for :func:`.local_pool`
workers (the same machine); any other executor gets the codes themselves.

>>> import numpy as np

from ...kernel.evaluate import Prepared, prepare
>>> codes = np.arange(12, dtype=np.uint8).reshape(4, 3)
>>> shared = share_codes(codes)
>>> bool((shared.handle.read() == codes).all())
True
>>> shared.release()
"""

from __future__ import annotations

import hashlib
import threading
from collections import OrderedDict
from dataclasses import dataclass
from multiprocessing import shared_memory

import numpy as np

from ...kernel.evaluate import Prepared, prepare

__all__ = ["KEEP", "SharedCodes", "Shared", "share_codes"]

#: how many input arrays a worker keeps (by digest)
KEEP = 2

_LOCK = threading.Lock()
_KEPT: OrderedDict[str, np.ndarray] = OrderedDict()
_PREPARED: OrderedDict[tuple[str, int, int], Prepared] = OrderedDict()


@dataclass(frozen=True)
class SharedCodes:
    """What a chunk carries instead of the codes (pickles in well under a kilobyte)."""

    name: str
    shape: tuple[int, ...]
    dtype: str
    digest: str

    def read(self) -> np.ndarray:
        """The codes (read-only): this worker's kept copy, or a copy of the block on first sight."""
        with _LOCK:
            arr = _KEPT.get(self.digest)
            if arr is not None:
                _KEPT.move_to_end(self.digest)
                return arr
        block = shared_memory.SharedMemory(name=self.name)
        try:
            view: np.ndarray = np.ndarray(self.shape, dtype=np.dtype(self.dtype), buffer=block.buf)
            arr = view.copy()  # the worker's own memory: nothing points into the block once it closes
            del view
        finally:
            block.close()
        arr.setflags(write=False)
        with _LOCK:
            _KEPT[self.digest] = arr
            while len(_KEPT) > KEEP:
                _KEPT.popitem(last=False)
        return arr


    def prepared(self, bits: int, n_in: int) -> Prepared:
        """The kernel's decomposition of the codes, made once per worker (by digest, bits and inputs)."""
        key = (self.digest, bits, n_in)
        with _LOCK:
            prep = _PREPARED.get(key)
        if prep is None:
            prep = prepare(self.read(), bits, n_in)
            with _LOCK:
                _PREPARED[key] = prep
                while len(_PREPARED) > KEEP:
                    _PREPARED.popitem(last=False)
        return prep


class Shared:
    """The driver's side: the block and its handle; :meth:`release` unlinks the block."""

    def __init__(self, block: shared_memory.SharedMemory, handle: SharedCodes) -> None:
        self.block = block
        self.handle = handle

    def release(self) -> None:
        """Close and unlink the block (workers that copied it keep their copies)."""
        self.block.close()
        try:
            self.block.unlink()
        except FileNotFoundError:  # already gone (released twice)
            pass


def share_codes(codes: np.ndarray) -> Shared:
    """Write ``codes`` into a new shared-memory block; its handle names it and digests the bytes."""
    arr = np.ascontiguousarray(codes)
    digest = hashlib.blake2b(arr.data, digest_size=16)
    digest.update(f"{arr.shape}|{arr.dtype.str}".encode())
    block = shared_memory.SharedMemory(create=True, size=max(arr.nbytes, 1))
    view: np.ndarray = np.ndarray(arr.shape, dtype=arr.dtype, buffer=block.buf)
    view[...] = arr
    del view
    return Shared(block, SharedCodes(block.name, tuple(arr.shape), arr.dtype.str, digest.hexdigest()))
