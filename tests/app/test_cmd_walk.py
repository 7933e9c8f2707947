"""``mapper walk`` on the command line: refusals are one line, exit status 2, nothing written."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

from mapper.cli.main import main
from mapper.survey.store import Survey

ROOT = Path(__file__).resolve().parents[2]


def _walk(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "mapper", "walk", *args],
        cwd=ROOT, capture_output=True, text=True, stdin=subprocess.DEVNULL, timeout=60,
    )


def test_survey_open_elsewhere_is_refused(box_survey: Path):
    with Survey.open(box_survey, write=True):
        done = _walk(str(box_survey))
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "open for writing by process" in lines[0], done.stderr


def test_needs_a_terminal(box_survey: Path, capsys):
    assert main(["walk", str(box_survey)]) == 2
    assert "needs an interactive terminal" in capsys.readouterr().err
    with Survey.open(box_survey) as survey:
        assert survey.count_rows() == 0


def test_new_only_options_refused_without_new(box_survey: Path, capsys):
    assert main(["walk", str(box_survey), "--spacing", "1"]) == 2
    assert "only apply with --new" in capsys.readouterr().err
