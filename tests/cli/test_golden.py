"""Golden comparison: the sample survey's figures from the command line, the exports and the app.

The reference is this program's own output when the fixture was written (``tests/cli/golden.py``
says how to regenerate it): a regression pin for changes that should leave every figure as it
was, not an outside check of correctness. Floats compare with a relative tolerance of 1e-9
(the computation is deterministic), text exactly.
"""

import json
from pathlib import Path

import pytest

from tests.cli import golden


@pytest.fixture(scope="module")
def figures(tmp_path_factory) -> dict:
    tmp: Path = tmp_path_factory.mktemp("golden")
    return json.loads(json.dumps(golden.collect(tmp), allow_nan=True))


@pytest.fixture(scope="module")
def want() -> dict:
    return json.loads(golden.FIXTURE.read_text(encoding="utf-8"))


SECTIONS = ("grid_stdout", "grid_summary", "stored_field", "hotspots_json", "gpkg", "tif", "report", "methods",
            "live")


def test_fixture_has_every_section_and_the_sample_has_hotspots(want):
    assert set(want) == set(SECTIONS)
    assert want["stored_field"]["method"] == "physics"
    assert len(want["hotspots_json"]["hotspots"]) == 3
    assert set(want["methods"]) >= set(golden.METHODS)


@pytest.mark.parametrize("section", SECTIONS)
def test_figures_match_the_golden_fixture(figures, want, section):
    diff = golden.differences(want[section], figures[section], section)
    assert not diff, "\n".join(diff[:30])


def test_comparison_sees_a_change():
    # the comparer itself: a change beyond the tolerance, a changed text and a missing key are found
    assert golden.differences({"a": 1.0}, {"a": 1.0 + 1e-12}) == []
    assert golden.differences({"a": 1.0}, {"a": 1.0 + 1e-6})
    assert golden.differences({"a": "x"}, {"a": "y"})
    assert golden.differences({"a": 1, "b": 2}, {"a": 1})
    assert golden.differences([1.0, 2.0], [1.0])
