"""Fixtures for the terminal app: an open walk over the box survey (15 points at 2 m)."""

from __future__ import annotations

from pathlib import Path

import pytest

from mapper.app.session import WalkSession
from mapper.survey.store import Survey


@pytest.fixture
def walk(box_survey: Path):
    """A :class:`WalkSession` on the box survey, closed after the test."""
    survey = Survey.open(box_survey, write=True)
    try:
        yield WalkSession(survey)
    finally:
        survey.close()
