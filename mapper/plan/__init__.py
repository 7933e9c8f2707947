"""Stage 2: the walking grid planned over a site."""

from mapper.plan.grid import DEFAULT_SPACING_M, Plan, PlanPoint, plan_grid

__all__ = ["DEFAULT_SPACING_M", "Plan", "PlanPoint", "plan_grid"]
