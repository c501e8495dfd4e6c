"""Input codes through one shared-memory block for a local pool (search/shared.py)."""

import pickle
from multiprocessing import shared_memory

import numpy as np
import pytest

from fxnet_widgets.core.analysis.search import shared as sh


def test_handle_reads_the_codes_and_pickles_small():
    codes = np.random.default_rng(0).integers(0, 256, (50_000, 3), dtype=np.uint8)
    block = sh.share_codes(codes)
    try:
        assert len(pickle.dumps(block.handle)) < 1024  # the chunk carries a name, not 150 kB of codes
        sh._KEPT.clear()
        got = block.handle.read()
        assert got.dtype == codes.dtype and np.array_equal(got, codes)
        assert not got.flags.writeable
    finally:
        block.release()
    # the reader's copy outlives the block, which is gone once released
    assert np.array_equal(block.handle.read(), codes)
    with pytest.raises(FileNotFoundError):
        shared_memory.SharedMemory(name=block.handle.name)
    block.release()  # twice: no error


def test_reader_keeps_a_bounded_number_of_arrays():
    sh._KEPT.clear()
    blocks = [sh.share_codes(np.full((10, 3), v, dtype=np.uint16)) for v in range(sh.KEEP + 2)]
    try:
        for b in blocks:
            b.handle.read()
        assert len(sh._KEPT) == sh.KEEP
        assert list(sh._KEPT) == [b.handle.digest for b in blocks[-sh.KEEP :]]
    finally:
        for b in blocks:
            b.release()


def test_equal_bytes_of_another_shape_are_other_data():
    a = sh.share_codes(np.zeros((4, 3), np.uint8))
    b = sh.share_codes(np.zeros((6, 2), np.uint8))
    try:
        assert a.handle.digest != b.handle.digest
    finally:
        a.release()
        b.release()


def test_worker_decomposes_the_data_once():
    codes = np.random.default_rng(5).integers(0, 256, (5000, 3), dtype=np.uint8)
    block = sh.share_codes(codes)
    try:
        first = block.handle.prepared(8, 3)
        assert block.handle.prepared(8, 3) is first
        assert first.n == 5000 and np.array_equal(first.flat, codes)
    finally:
        block.release()
