"""The survey file: site, plan, meters, readings, conditions, events and field models."""

from mapper.survey.store import NewReading, Survey

__all__ = ["NewReading", "Survey"]
