"""``mapper sources`` and ``--height``: the physical model from the command line, and its bad inputs."""

from __future__ import annotations

import json

import numpy as np
import pytest

from mapper.cli.main import main
from mapper.physics.images import PointCharge, field_z
from mapper.survey.create import create_survey
from mapper.survey.store import NewReading, Survey

HALL_SITE = """
[site]
name = "Small hall"
units = "m"
[outline]
wkt = "POLYGON ((0 0, 24 0, 24 16, 0 16, 0 0))"
[[asset]]
name = "film carriage"
kind = "machine"
wkt = "POINT (15 9)"
{height}
"""
# A point charge over a grounded floor (Griffiths, Introduction to Electrodynamics, sec. 3.2.1).
CHARGE = PointCharge(15.0, 9.0, 2.5, 2e-7)


def _survey(tmp_path, height_line="height_m = 2.5"):
    site = tmp_path / "hall.toml"
    site.write_text(HALL_SITE.format(height=height_line), encoding="utf-8")
    path = tmp_path / "hall.survey"
    create_survey(path, site, spacing_m=2.0).close()
    with Survey.open(path, write=True) as s:
        pts = s.plan.points
        v = field_z([CHARGE], np.array([p.x for p in pts]), np.array([p.y for p in pts]), 1.0)
        s.add_readings([NewReading(p.x, p.y, float(e), "V/m", float(e), point=p.label, height_m=1.0)
                        for p, e in zip(pts, v, strict=True)])
    return path


def test_sources_lists_the_asset_with_its_given_height(tmp_path, capsys):
    path = _survey(tmp_path)
    assert main(["sources", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    (src,) = [s for s in data["sources"] if s["asset"] == "film carriage"]
    assert src["height_m"] == 2.5 and src["kind"] == "point"
    assert src["charge_c"] == pytest.approx(2e-7, rel=0.02)  # noise-free: the charge itself
    assert data["limitations"]


def test_grid_height_matches_the_closed_form(tmp_path, capsys):
    path = _survey(tmp_path)
    assert main(["grid", str(path), "--method", "physics", "--height", "0.8", "--cell", "1"]) == 0
    from mapper.field import field_from_bytes

    with Survey.open(path) as s:
        _, data, _ = s.latest_field()
    g = field_from_bytes(data)
    mx, my = np.meshgrid(g.x, g.y)
    truth = field_z([CHARGE], mx, my, 0.8)
    assert np.max(np.abs(g.estimate[g.inside] - truth[g.inside])) < 0.01 * np.max(np.abs(truth))


@pytest.mark.parametrize("argv, message", [
    (["--height", "0"], "positive"),
    (["--height", "-1"], "positive"),
    (["--method", "kriging", "--height", "1"], "physical model"),
])
def test_bad_height_options_are_one_line_errors(tmp_path, capsys, argv, message):
    path = _survey(tmp_path)
    before = path.read_bytes()
    with pytest.raises(SystemExit) if argv[1] in ("0", "-1") else _none():
        assert main(["grid", str(path), *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and len(err.splitlines()) == 1 and "Traceback" not in err
    assert path.read_bytes() == before


class _none:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def test_asset_height_that_is_not_a_number_is_refused(tmp_path, capsys):
    site = tmp_path / "bad.toml"
    site.write_text(HALL_SITE.format(height='height_m = "tall"'), encoding="utf-8")
    assert main(["new", str(tmp_path / "x.survey"), "--site", str(site)]) == 2
    err = capsys.readouterr().err.strip()
    assert "height_m" in err and "bad.toml:" in err and len(err.splitlines()) == 1
    assert not (tmp_path / "x.survey").exists()


def test_source_search_with_too_few_readings_says_so(tmp_path, capsys):
    site = tmp_path / "hall.toml"
    site.write_text(HALL_SITE.format(height=""), encoding="utf-8")
    path = tmp_path / "few.survey"
    create_survey(path, site, spacing_m=2.0).close()
    with Survey.open(path, write=True) as s:
        s.add_readings([NewReading(x, y, 10.0 * k, "V/m", 10.0 * k) for k, (x, y) in
                        enumerate([(1, 1), (5, 1), (9, 3), (3, 7), (12, 12), (20, 4)])])
    assert main(["sources", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "8 or more distinct positions" in err and len(err.splitlines()) == 1


def test_bare_threshold_is_read_in_the_surveys_display_unit(tmp_path, capsys):
    # One rule everywhere: '125' in a V/in survey is 125 V/in (1 in = 0.0254 m exactly, so
    # 4 921.26 V/m), as the survey app reads it, and it is printed back with its unit.
    site = tmp_path / "hall.toml"
    site.write_text(HALL_SITE.format(height=""), encoding="utf-8")
    path = tmp_path / "vin.survey"
    assert main(["new", str(path), "--site", str(site), "--unit", "V/in", "--threshold", "100"]) == 0
    with Survey.open(path) as s:
        assert s.threshold_v_per_m == pytest.approx(100 / 0.0254)
        pts = s.plan.points
    with Survey.open(path, write=True) as s:
        v = field_z([CHARGE], np.array([p.x for p in pts]), np.array([p.y for p in pts]), 1.0)
        s.add_readings([NewReading(p.x, p.y, float(e) * 0.0254, "V/in", float(e)) for p, e in zip(pts, v, strict=True)])
    capsys.readouterr()
    assert main(["hotspots", str(path), "--threshold", "125", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["threshold_v_per_m"] == pytest.approx(125 / 0.0254)
    assert "display unit V/in" in data["threshold_source"]
