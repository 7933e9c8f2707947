"""The survey file: site, plan, meters, readings, conditions, events and field models."""

from mapper.readings.model import NewReading
from mapper.survey.store import Survey

__all__ = ["NewReading", "Survey"]
