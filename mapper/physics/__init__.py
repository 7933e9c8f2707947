"""Analytic electrostatics used for sample data and checks (method of images)."""

from mapper.physics.images import (
    EPSILON_0,
    AreaCharge,
    LineCharge,
    PointCharge,
    field_z,
    induced_surface_charge,
)

__all__ = ["EPSILON_0", "AreaCharge", "LineCharge", "PointCharge", "field_z", "induced_surface_charge"]
