"""The method-of-images model against Griffiths, Introduction to Electrodynamics, sec. 3.2.1."""

import numpy as np
import pytest
from scipy import integrate

from mapper.physics.images import (
    EPSILON_0,
    AreaCharge,
    LineCharge,
    PointCharge,
    field_z,
    induced_surface_charge,
)


def test_induced_charge_integrates_to_minus_q():
    # Griffiths eq. 3.10-3.11: sigma = -q h / (2 pi (r^2+h^2)^(3/2)); total induced charge = -q.
    q, h = 2.5e-9, 0.7
    total, _ = integrate.quad(lambda r: induced_surface_charge(q, h, r) * 2 * np.pi * r, 0, np.inf)
    assert total == pytest.approx(-q, rel=1e-8)


def test_field_at_plane_matches_closed_form():
    # Just above a grounded conductor E = sigma / epsilon_0 along the normal (Griffiths eq. 2.49),
    # so E_z(r, 0) = -q h / (2 pi epsilon_0 (r^2 + h^2)^(3/2)).
    q, h = 1e-8, 0.5
    r = np.linspace(0, 3, 31)
    expected = induced_surface_charge(q, h, r) / EPSILON_0
    got = field_z([PointCharge(0, 0, h, q)], r, 0 * r, 0.0)
    np.testing.assert_allclose(got, expected, rtol=1e-12)


def test_field_far_above_is_dipole():
    # q and its image form a dipole p = 2 q h; on the axis E_z = 2 k p / z^3 for z >> h.
    q, h, z = 1e-9, 0.01, 5.0
    p = 2 * q * h
    expected = 2 * p / (4 * np.pi * EPSILON_0 * z**3)
    got = field_z([PointCharge(0, 0, h, q)], 0.0, 0.0, z)
    assert float(got) == pytest.approx(expected, rel=1e-3)


def test_line_charge_matches_closed_form():
    # Finite line of half-length a, at perpendicular distance d from its midpoint:
    # E = lambda / (2 pi eps0 d) * a / sqrt(a^2 + d^2) (Griffiths Example 2.2); with its image:
    lam, h, z, a = 1e-9, 0.5, 1.0, 10.0

    def perpendicular(d):
        return lam / (2 * np.pi * EPSILON_0 * d) * a / np.hypot(a, d)

    line = LineCharge(-a, 0.0, a, 0.0, h, lam, nodes_per_m=20)
    expected = perpendicular(z - h) - perpendicular(z + h)
    assert float(field_z([line], 0.0, 0.0, z)) == pytest.approx(expected, rel=1e-6)


def test_square_sheet_matches_closed_form_and_plate_limit():
    # On the axis of a uniformly charged square of side 2a, at distance d:
    # E = sigma / (pi eps0) * arctan(a^2 / (d sqrt(2 a^2 + d^2)))  (standard result, e.g. Griffiths
    # Problem 2.11-style integration). Between the sheet and its image it tends to sigma/eps0, the
    # parallel-plate value.
    sigma, h, z, a = 1e-7, 0.2, 0.1, 2.0

    def axis(d):
        return sigma / (np.pi * EPSILON_0) * np.arctan(a * a / (d * np.sqrt(2 * a * a + d * d)))

    sheet = AreaCharge(-a, -a, a, a, h, sigma, nodes_per_m=40)
    between = float(field_z([sheet], 0.0, 0.0, z))
    assert between == pytest.approx(-(axis(h - z) + axis(h + z)), rel=1e-4)
    assert between == pytest.approx(-sigma / EPSILON_0, rel=0.1)
