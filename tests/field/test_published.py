"""Published worked examples of kriging."""

import numpy as np
import pytest

from mapper.field import OrdinaryKriging, Variogram


def test_kitanidis_example_3_2_linear_variogram_with_nugget():
    # Kitanidis, Introduction to Geostatistics (1997), Example 3.2: two points, linear variogram
    # gamma(h) = 0.1 + 0.006 h; printed estimate 1.6364 and variance 0.4201 at (18.8, 67.9).
    xy = np.array([[9.7, 47.6], [43.8, 24.6]])
    z = np.array([1.22, 2.822])
    vg = Variogram(model="linear", slope=0.006, nugget=0.1)
    est, std = OrdinaryKriging(variogram=vg, neighbors=None).fit(xy, z).predict([[18.8, 67.9]])
    assert est[0] == pytest.approx(1.6364, abs=5e-5)  # printed to 4 decimals
    assert std[0] ** 2 == pytest.approx(0.4201, abs=5e-5)


# Isaaks & Srivastava, An Introduction to Applied Geostatistics (1989), ch. 12, seven points and
# target (65, 137); values as reproduced in the geoR package's test script. Ranges are practical
# ranges (exp(-3h/a), exp(-3h^2/a^2)), which is the convention of mapper's Variogram.
IS_XY = np.array([(61, 139), (63, 140), (64, 129), (68, 128), (71, 140), (73, 141), (75, 128)], float)
IS_Z = np.array([477, 696, 227, 646, 606, 791, 783], float)
IS_TARGET = [[65.0, 137.0]]


@pytest.mark.parametrize(
    ("case", "vg", "estimate", "variance"),
    [
        ("12.03", Variogram("exponential", sill=10, range=10), 592.7, 8.96),
        ("12.06", Variogram("exponential", sill=20, range=10), 592.7, 17.91),
        ("12.08", Variogram("gaussian", sill=10, range=10), 559.4, 4.78),
        ("12.10", Variogram("exponential", sill=5, range=10, nugget=5), 596.8, 10.31),
        ("12.12", Variogram("exponential", sill=10, range=20), 572.4, 5.76),
    ],
)
def test_isaaks_srivastava_chapter_12(case, vg, estimate, variance):
    est, std = OrdinaryKriging(variogram=vg).fit(IS_XY, IS_Z).predict(IS_TARGET)
    # Printed to 1 decimal (estimate) and 2 decimals (variance): half a unit of the last digit.
    assert est[0] == pytest.approx(estimate, abs=0.05), case
    assert std[0] ** 2 == pytest.approx(variance, abs=0.005), case


def test_isaaks_srivastava_12_03_weights():
    # Same source, case 12.03: weights .173 .318 .129 .086 .151 .057 .086 (3 decimals).
    kr = OrdinaryKriging(variogram=Variogram("exponential", sill=10, range=10)).fit(IS_XY, IS_Z)
    w = kr.weights(IS_TARGET)[0]
    np.testing.assert_allclose(w, [0.173, 0.318, 0.129, 0.086, 0.151, 0.057, 0.086], atol=5e-4)
    assert w.sum() == pytest.approx(1.0, abs=1e-12)  # unbiasedness, exact property
