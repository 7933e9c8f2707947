"""History of the sample hall over three surveys: places cleared, recurring and new, zone pass/fail.

The truth is the sample generator's source arrangement (sample_sites/generate.py), a physical
model independent of the archive: before the remedial work belt 1, the stretch-wrap station and
the tote stack are charged; after it belt 1 carries a tenth of its charge; a week later the tote
stack is gone and film-wrapped pallets on the pallet rack are charged.
"""

from __future__ import annotations

import importlib.util
import json

import numpy as np
import pytest
import shapely

from mapper.archive.history import site_history
from mapper.archive.push import push
from mapper.cli.main import main
from mapper.physics.images import field_z
from mapper.site.site_file import load_site
from tests.archive.conftest import new_database
from tests.archive.helpers import HALL_SURVEYS, SAMPLES


def _generator():
    spec = importlib.util.spec_from_file_location("sample_generate", SAMPLES / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def hall_history(pg_server, hall_files):
    url = new_database(pg_server)
    assert main(["archive", "init", "--db", url]) == 0
    paths = hall_files
    ids = {}
    for name in ("north_hall_third", "north_hall", "north_hall_after"):  # pushed out of time order
        ids[name] = push(paths[name], url).survey_id
    return {"url": url, "ids": ids, "history": site_history(url, "north hall")}


def _place_near(history, asset):
    found = [p for p in history.places if p.nearest_asset == asset]
    assert len(found) == 1, (asset, history.places)
    return found[0]


def test_surveys_in_time_order(hall_history):
    h, ids = hall_history["history"], hall_history["ids"]
    assert [s.survey_id for s in h.surveys] == [ids[n] for n in HALL_SURVEYS]
    assert h.site == "North Hall"


def test_cleared_recurring_and_new_places(hall_history):
    h = hall_history["history"]
    timeline = {asset: [s.status_of(_place_near(h, asset).id) for s in h.surveys]
                for asset in ("belt 1", "stretch-wrap station", "tote stack", "pallet rack")}
    assert timeline == {
        "belt 1": ["new", "cleared", None],  # remedied: a tenth of its charge
        "stretch-wrap station": ["new", "recurring", "recurring"],  # unchanged throughout
        "tote stack": ["new", "recurring", "cleared"],  # moved out in the third survey
        "pallet rack": [None, None, "new"],  # film-wrapped pallets charged in the third
    }
    assert len(h.places) == 4
    polarity = {p.nearest_asset: p.polarity for p in h.places}
    # a negative charge overhead gives an upward (positive, physics convention) field below it
    assert polarity == {"belt 1": "positive", "tote stack": "positive", "pallet rack": "positive",
                        "stretch-wrap station": "negative"}
    assert _place_near(h, "tote stack").status == "cleared"
    assert _place_near(h, "belt 1").status == "gone"


def test_zone_pass_fail_follows_the_true_field(hall_history):
    gen = _generator()
    site = load_site(SAMPLES / "north_hall.toml")
    zone = site.zones[0]
    xs, ys = np.meshgrid(np.arange(24.0, 36.01, 0.25), np.arange(10.0, 16.01, 0.25))
    truths = []
    for sources in (gen.HALL_SOURCES, gen.HALL_SOURCES_AFTER, gen.HALL_SOURCES_THIRD):
        worst = float(np.max(np.abs(field_z(sources, xs, ys, gen.HALL_METER_HEIGHT_M))))
        truths.append(worst >= zone.limit_v_per_m)
    states = [s.zones[0] for s in hall_history["history"].surveys]
    assert [z.zone for z in states] == ["packing EPA"] * 3
    assert [not z.passed for z in states] == truths == [True, False, False]
    assert states[0].hotspot_area_m2 > 0 and states[1].hotspot_area_m2 == 0 == states[2].hotspot_area_m2


def test_largest_field_and_areas(hall_history):
    h = hall_history["history"]
    for step in h.surveys:
        assert step.max_abs_v_per_m >= step.max_abs_reading_v_per_m > step.threshold_v_per_m
        assert step.hotspot_area_m2 == pytest.approx(sum(e.area_m2 for e in step.hotspots))
    # the remedial work removed belt 1's hotspot, the largest of the first survey
    assert h.surveys[1].hotspot_area_m2 < 0.5 * h.surveys[0].hotspot_area_m2


def test_history_json_from_the_command_line(hall_history, capsys):
    capsys.readouterr()
    assert main(["archive", "history", "--site", "North Hall", "--db", hall_history["url"], "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data == json.loads(json.dumps(hall_history["history"].to_dict()))
    assert [s["cleared"] for s in data["surveys"]][1:] != [[], []]
    assert main(["archive", "history", "--site", "North Hall", "--db", hall_history["url"]]) == 0
    text = capsys.readouterr().out
    assert "cleared" in text and "recurring" in text and "FAIL" in text and "pass" in text
    near = shapely.Point(_place_near(hall_history["history"], "pallet rack").x_m,
                         _place_near(hall_history["history"], "pallet rack").y_m)
    rack = next(a for a in load_site(SAMPLES / "north_hall.toml").assets if a.name == "pallet rack")
    assert near.distance(rack.geometry) < 2.0


def test_report_gains_a_history_page_with_db(hall_history, hall_files, tmp_path, capsys):
    import pypdfium2 as pdfium

    survey = str(hall_files["north_hall_after"])
    assert main(["report", survey, str(tmp_path / "history.pdf"), "--db", hall_history["url"]]) == 0
    doc = pdfium.PdfDocument(tmp_path / "history.pdf")
    try:
        assert len(doc) == 3  # map and findings (an IDW model has no sources page), then the history
        last = " ".join(doc[len(doc) - 1].get_textpage().get_text_range().split())
    finally:
        doc.close()
    assert "North Hall: history of the site's surveys" in last
    assert "this survey" in last and "FAIL" in last and "pass" in last
    for word in ("new", "recurring", "cleared", "near tote stack", "near pallet rack"):
        assert word in last, word
    # a site the archive does not hold: one line, and no report written
    other = tmp_path / "box"
    other.mkdir()
    from tests.archive.helpers import small_survey

    box = small_survey(other, "Box", "r")
    capsys.readouterr()
    assert main(["report", str(box), str(tmp_path / "box.pdf"), "--db", hall_history["url"]]) == 2
    assert "no site named 'Box'" in capsys.readouterr().err
    assert not (tmp_path / "box.pdf").exists()
