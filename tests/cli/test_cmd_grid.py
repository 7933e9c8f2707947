"""``mapper grid``: the stored field model, a variogram given on the command line, bad options."""

import numpy as np
import pytest

from mapper.cli.main import main
from mapper.field import OrdinaryKriging, field_from_bytes
from mapper.survey.store import NewReading, Survey


@pytest.fixture
def filled_survey(box_survey):
    """The 10 m x 6 m box survey with a plane field plus a bump at every planned point."""
    with Survey.open(box_survey, write=True) as s:
        rows = []
        for p in s.plan.points:
            value = 200.0 + 30.0 * p.x - 20.0 * p.y + 900.0 * np.exp(-((p.x - 5) ** 2 + (p.y - 3) ** 2) / 4)
            rows.append(NewReading(p.x, p.y, value, "V/m", value, point=p.label))
        s.add_readings(rows)
    return box_survey


def test_given_variogram_is_used_as_is(filled_survey, capsys):
    args = ["grid", str(filled_survey), "--variogram", "exponential", "--sill", "40000", "--range", "6",
            "--nugget", "100", "--cell", "0.5"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "given on the command line" in out and "kriging" in out
    with Survey.open(filled_survey) as s:
        summary, data, _ = s.latest_field()
        readings = s.readings()
    grid = field_from_bytes(data)
    vg = grid.settings.kriging.variogram
    assert (vg.model, vg.sill, vg.range, vg.nugget) == ("exponential", 40000.0, 6.0, 100.0)
    # the stored grid is the ordinary kriging estimate with that variogram, node for node
    xy = np.array([(r.x, r.y) for r in readings])
    values = np.array([r.value_v_per_m for r in readings])
    mx, my = np.meshgrid(grid.x, grid.y)
    inside = np.isfinite(grid.estimate)
    est, std = OrdinaryKriging(variogram=vg, neighbors=None).fit(xy, values).predict(
        np.column_stack([mx[inside], my[inside]])
    )
    np.testing.assert_allclose(grid.estimate[inside], est, rtol=1e-9, atol=1e-6)
    np.testing.assert_allclose(grid.std[inside], std, rtol=1e-9, atol=1e-6)
    assert summary["method"] == "kriging"


def test_auto_prints_cv_table(filled_survey, capsys):
    assert main(["grid", str(filled_survey)]) == 0
    out = capsys.readouterr().out
    for method in ("kriging", "universal", "rbf", "idw"):
        assert method in out
    assert "RMSE" in out


@pytest.mark.parametrize(
    ("extra", "words"),
    [
        (["--sill", "10"], "needs --variogram"),
        (["--variogram", "spherical", "--sill", "10"], "needs --range"),
        (["--variogram", "linear"], "needs --slope"),
        (["--variogram", "exponential", "--sill", "-1", "--range", "5"], "sill"),
        (["--variogram", "gaussian", "--sill", "10", "--range", "5", "--method", "idw"], "kriging methods"),
        (["--variogram", "exponential", "--sill", "10", "--range", "5", "--ratio", "0.5"], "ratio"),
    ],
)
def test_bad_variogram_options(filled_survey, capsys, extra, words):
    with Survey.open(filled_survey) as s:
        before = s.latest_field()
    assert main(["grid", str(filled_survey), *extra]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and words in err
    with Survey.open(filled_survey) as s:
        assert s.latest_field() == before


def test_too_few_readings(box_survey, capsys):
    with Survey.open(box_survey, write=True) as s:
        s.add_readings([NewReading(1, 1, 5, "V/m", 5), NewReading(3, 1, 6, "V/m", 6)])
    assert main(["grid", str(box_survey)]) == 2
    assert "5 or more distinct positions" in capsys.readouterr().err
