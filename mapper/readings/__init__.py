"""Stage 3: readings as stored in the survey file, and their import."""

from mapper.readings.model import READING_KINDS, Conditions, CorrectedReading, Reading

__all__ = ["READING_KINDS", "Conditions", "CorrectedReading", "Reading"]
