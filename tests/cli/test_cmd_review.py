"""``mapper review``: outlier flags listed; exclusion is a superseding edit that can be undone."""

import json

import numpy as np

from mapper.cli.main import main
from mapper.survey.store import NewReading, Survey
from mapper.workflow import survey_products


def fill(path, spike_at="C3"):
    with Survey.open(path, write=True) as s:
        rows = []
        for p in s.plan.points:
            value = 100.0 + 10.0 * p.x + (5000.0 if p.label == spike_at else 0.0)
            rows.append(NewReading(p.x, p.y, value, "V/m", value, point=p.label))
        s.add_readings(rows)


def test_spike_listed_excluded_and_included_again(box_survey, capsys):
    fill(box_survey)
    assert main(["review", str(box_survey), "--json"]) == 0
    flagged = json.loads(capsys.readouterr().out)
    assert [r["point"] for r in flagged] == ["C3"] and "outlier?" in flagged[0]["flags"]
    spike = flagged[0]["id"]
    assert main(["review", str(box_survey), "--exclude", str(spike), "--reason", "bumped the meter"]) == 0
    with Survey.open(box_survey) as s:
        products = survey_products(s, use_stored=False)
        rows = s.count_rows()
    used = [r for r in products.readings if "excluded" not in r.reading.flags]
    assert len(used) == len(products.readings) - 1  # still in the survey, out of the model
    assert not np.any(np.isclose([r.value_v_per_m for r in used], 5000.0 + 100.0 + 10.0 * 5.0, atol=200))
    # the id shown before the exclusion still finds the reading (it was superseded by an edit row)
    assert main(["review", str(box_survey), "--include", str(spike)]) == 0
    with Survey.open(box_survey) as s:
        assert s.count_rows() == rows + 1  # superseding rows only, nothing deleted
        assert not any("excluded" in r.flags for r in s.readings())


def test_unknown_id_one_line_error(box_survey, capsys):
    fill(box_survey)
    assert main(["review", str(box_survey), "--include", "999"]) == 2
    assert "not a current reading" in capsys.readouterr().err
