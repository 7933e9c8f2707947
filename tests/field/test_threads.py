"""The BLAS thread limit (mapper.field.threads)."""

import os

import numpy as np
import pytest

from mapper.field.threads import blas_threads, current, free_cores


def test_limit_is_set_inside_and_restored_after():
    before = current()
    if not before:
        pytest.skip("no OpenBLAS found in this process")
    with blas_threads(1):
        assert current() == [1] * len(before)
        a = np.random.default_rng(0).normal(size=(200, 200))
        assert np.allclose(np.linalg.solve(a, a), np.eye(200))  # the libraries still work
        with blas_threads(10**6):  # an inner block sets its own count, at most the default
            assert current() == before
        assert current() == [1] * len(before)
    assert current() == before


def test_limit_is_restored_after_an_error():
    before = current()
    with pytest.raises(RuntimeError), blas_threads(1):
        raise RuntimeError("boom")
    assert current() == before


def test_free_cores_is_between_one_and_the_usable_cores():
    assert 1 <= free_cores() <= len(os.sched_getaffinity(0))
