"""Shared synthetic data for the field-engine tests (invented, fixed seeds)."""

import numpy as np
import pytest

from mapper.field import Variogram


@pytest.fixture
def scattered():
    """80 readings in a 50 m x 30 m hall with a smooth field plus noise, and 40 targets."""
    rng = np.random.default_rng(7)
    xy = rng.uniform([0, 0], [50, 30], size=(80, 2))
    z = 100 + 20 * np.sin(xy[:, 0] / 8) + 10 * np.cos(xy[:, 1] / 6) + 0.02 * xy[:, 0] ** 2
    z = z + rng.normal(0, 2, size=80)
    t = rng.uniform([0, 0], [50, 30], size=(40, 2))
    return xy, z, t


@pytest.fixture
def aniso_vg():
    """The public API's example variogram: exponential, anisotropic, with a nugget added."""
    return Variogram(model="exponential", sill=10.0, range=20.0, nugget=0.5, angle=135.0, ratio=2.0)
