"""``mapper hotspots`` and ``mapper compare`` on real survey files."""

from __future__ import annotations

import json
import textwrap
import time

import numpy as np
import pyogrio
import pytest
import rasterio
import shapely
from scipy.optimize import brentq

import mapper.cli.main as cli
from mapper.features.cautions import CAUTIONS
from mapper.field import field_to_bytes
from mapper.survey.create import create_survey
from mapper.survey.store import NewReading, Survey
from tests.conftest import BOX_SITE
from tests.features.features_analytic import charge_for_peak, grid_over, point_charge_ez

T = 125 / 0.0254  # the survey default, 125 V/in in V/m (1 in = 0.0254 m exactly)
OUTLINE = shapely.box(0, 0, 10, 6)  # the box site of tests/conftest.py
Q = charge_for_peak(20e3, 1.0)
# Charged objects over the floor (method of images, Griffiths sec. 3.2.1).
SOURCES = {"bin": (Q, 2.5, 3.0), "tray": (-0.8 * Q, 7.5, 3.3)}


def _field(names):
    def f(X, Y):
        return sum(point_charge_ez(X, Y, *SOURCES[n], 1.0) for n in names)

    return f


@pytest.fixture(autouse=True)
def _commands(monkeypatch):
    """Register the two commands if the main module does not list them yet."""
    extra = tuple(c for c in ("cmd_hotspots", "cmd_compare") if c not in cli.COMMANDS)
    monkeypatch.setattr(cli, "COMMANDS", cli.COMMANDS + extra)


def _survey(tmp_path, name, names, store=True, site_text=BOX_SITE):
    """A box-site survey with readings on a 1 m grid and, optionally, the exact field stored."""
    site = tmp_path / f"{name}.toml"
    site.write_text(site_text, encoding="utf-8")
    path = tmp_path / f"{name}.survey"
    f = _field(names)
    with create_survey(path, site, spacing_m=2.0) as survey:
        survey.add_readings(
            [
                NewReading(x, y, f(x, y), "V/m", f(x, y))
                for x in np.arange(0.5, 10, 1.0)
                for y in np.arange(0.5, 6, 1.0)
            ]
        )
        if store:
            time.sleep(0.01)  # the model must be newer than the readings
            grid = grid_over(OUTLINE, 0.1, f, std=300.0)
            survey.save_field("kriging", {"method": "kriging"}, field_to_bytes(grid))
    return path


def _run(capsys, *args):
    code = cli.main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_hotspots_json_on_a_stored_analytic_field(tmp_path, capsys):
    path = _survey(tmp_path, "box", ["bin", "tray"])
    code, out, err = _run(capsys, "hotspots", path, "--json")
    assert code == 0, err
    data = json.loads(out)
    assert data["threshold_source"] == "survey"
    assert data["threshold_v_per_m"] == pytest.approx(T)
    hs = {h["polarity"]: h for h in data["hotspots"]}
    assert set(hs) == {"negative", "positive"}
    neg = hs["negative"]  # the positive charge "bin"
    assert neg["status"] == "confirmed"  # readings at 1 m include some above the level
    assert np.hypot(neg["peak_x"] - 2.5, neg["peak_y"] - 3.0) <= 0.1
    # Its outline is the |E| >= t disc of the closed form, within a tenth of the 0.1 m cell
    # (1 cm, as in test_features_hotspots), plus the tray's opposite field: up to 270 V/m at the
    # edge nearest to it (3.8 m away) against the bin's radial gradient of 7.2 kV/m per m there
    # (closed form), which moves that edge by up to 3.8 cm.
    r = brentq(lambda r: abs(point_charge_ez(2.5 + r, 3.0, Q, 2.5, 3.0, 1.0)) - T, 0, 5)
    disc = shapely.Point(2.5, 3.0).buffer(r, quad_segs=256)
    assert shapely.from_wkt(neg["wkt"]).hausdorff_distance(disc) <= 0.01 + 0.038
    assert data["probability_available"] is True
    assert data["limits_note"] and data["cautions"] == list(CAUTIONS)
    assert {r["key"] for r in data["rules"]} == {"S20.20-1999", "S20.20-2014 8.3.1"}


def test_hotspots_text_with_a_threshold_and_a_violation(tmp_path, capsys):
    path = _survey(tmp_path, "box", ["bin", "tray"])
    # The tray (peak 16 kV/m at (7.5, 3.3)) exceeds 125 V/in within 1.09 m of its foot (closed
    # form: r^2 = (16 kV/m / 4.92 kV/m)^(2/3) - h^2), which covers part of the bench (6..8 x
    # 4..5, 0.7 m away): ANSI/ESD S20.20-2014 cl. 8.3.1 is broken at distance 0. Nothing reaches
    # 2000 V/in, so the 1999 rule is not.
    code, out, err = _run(capsys, "hotspots", path, "--threshold", "1kV/m")
    assert code == 0, err
    assert "|E| >= 1000 V/m (command line)" in out
    assert "Hotspots (2)" in out
    assert "ANSI/ESD S20.20 (1999 text)" in out and "ANSI/ESD S20.20-2014 cl. 8.3.1" in out
    violation_lines = [ln for ln in out.splitlines() if ln.startswith("bench ")]
    assert len(violation_lines) == 1
    assert "0.0 cm" in violation_lines[0] and "S20.20-2014 8.3.1" in violation_lines[0]
    assert "ESD control plan" in out and "IEC TS 60079-32-1" in out
    assert "bench" in out  # nearest asset column


def test_hotspots_interpolates_when_the_stored_model_is_stale(tmp_path, capsys):
    path = _survey(tmp_path, "box", ["bin"])
    with Survey.open(path, write=True) as survey:
        survey.add_reading(NewReading(9.5, 5.5, 10.0, "V/m", 10.0))
    code, out, err = _run(capsys, "hotspots", path, "--json")
    assert code == 0, err
    data = json.loads(out)
    assert any("older than the latest change" in w for w in data["warnings"])
    assert "interpolated now" in data["field_model"]
    assert [h["polarity"] for h in data["hotspots"]] == ["negative"]


def test_compare_reports_the_removed_source_and_writes_a_geopackage(tmp_path, capsys):
    before = _survey(tmp_path, "before", ["bin", "tray"])
    after = _survey(tmp_path, "after", ["bin"])
    out_path = tmp_path / "diff.gpkg"
    code, out, err = _run(capsys, "compare", before, after, "--out", out_path, "--json")
    assert code == 0, err
    data = json.loads(out)
    status = {(c["polarity"], c["status"]) for c in data["changes"]}
    assert status == {("negative", "unchanged"), ("positive", "cleared")}
    assert data["summary"]["counts"]["cleared"] == 1
    layers = dict(pyogrio.list_layers(out_path))
    assert {"common_region", "difference_bands", "hotspot_changes", "summary"} <= set(layers)
    changes = pyogrio.read_dataframe(out_path, layer="hotspot_changes")
    assert sorted(changes["status"]) == ["cleared", "unchanged"]
    # The raster is after - before = minus the tray's field (same 0.1 m grid: exact at nodes).
    with rasterio.open(f"GPKG:{out_path}:difference") as ds:
        band = ds.read(1)
        row, col = ds.index(7.55, 3.35)
        assert band[row, col] == pytest.approx(
            -point_charge_ez(7.55, 3.35, *SOURCES["tray"], 1.0), rel=1e-5
        )
    assert not list(tmp_path.glob(".*partial*"))


def test_compare_writes_a_pdf_with_three_maps_on_one_scale(tmp_path, capsys):
    # The tray's source removed (analytic point charges over a grounded floor): the PDF shows the
    # before, after and difference maps, the change table and the cautions; --png the same page.
    import pypdfium2 as pdfium

    from mapper.features import CAUTIONS
    from mapper.features.colour_scale import edges_v_per_m

    before = _survey(tmp_path, "before", ["bin", "tray"])
    after = _survey(tmp_path, "after", ["bin"])
    out_path = tmp_path / "diff.gpkg"
    code, out, err = _run(capsys, "compare", before, after, "--out", out_path, "--png", "--json")
    assert code == 0, err
    data = json.loads(out)
    pdf, png = tmp_path / "diff.pdf", tmp_path / "diff.png"
    assert data["pdf"] == str(pdf) and data["png"] == str(png)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    doc = pdfium.PdfDocument(pdf)
    try:
        assert len(doc) == 1
        text = " ".join(doc[0].get_textpage().get_text_range().split())
    finally:
        doc.close()
    for title in ("before", "after", "difference (after - before)", "Hotspot changes", "Cautions"):
        assert title in text
    assert "cleared" in text and "unchanged" in text
    assert CAUTIONS[0].split(";")[0] in text
    # one colour bar for all three maps, labelled with the scale's edges around the action level
    t = data["summary"]["threshold_v_per_m"]
    assert "the same bands for before, after and their difference" in text
    from mapper.units import (
        plain_number,  # the survey's display unit is V/m (create_survey's default)
    )

    assert all(plain_number(e, 3) in text for e in edges_v_per_m(t))


def test_compare_refuses_a_pdf_name_before_any_work(tmp_path, capsys):
    before = _survey(tmp_path, "before", ["bin", "tray"])
    code, out, err = _run(capsys, "compare", before, before, "--out", tmp_path / "d.gpkg", "--pdf",
                          tmp_path / "d.txt")
    assert code == 2 and "should end in .pdf" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "d.gpkg").exists()


def test_compare_refuses_another_site_in_one_line(tmp_path, capsys):
    other = textwrap.dedent(
        """
        [site]
        name = "Yard"
        units = "m"
        [outline]
        wkt = "POLYGON ((0 0, 30 0, 30 20, 0 20, 0 0))"
        """
    )
    a = _survey(tmp_path, "a", ["bin"])
    b = _survey(tmp_path, "b", ["bin"], store=False, site_text=other)
    code, out, err = _run(capsys, "compare", a, b, "--out", tmp_path / "d.gpkg")
    assert code == 2
    assert len(err.strip().splitlines()) == 1 and "different sites" in err
    assert not (tmp_path / "d.gpkg").exists()


def test_hotspots_refuses_a_survey_with_too_few_readings_in_one_line(tmp_path, capsys):
    site = tmp_path / "few.toml"
    site.write_text(BOX_SITE, encoding="utf-8")
    path = tmp_path / "few.survey"
    with create_survey(path, site, spacing_m=2.0) as survey:
        survey.add_readings([NewReading(1.0 + i, 2.0, 50.0, "V/m", 50.0) for i in range(3)])
    code, out, err = _run(capsys, "hotspots", path)
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1
    assert str(path) in err and "5 or more distinct positions" in err and "has 3" in err


def test_hotspots_and_export_map_the_same_hotspots(tmp_path, capsys):
    # One pipeline behind both commands: the exported hotspot layer holds the very hotspots the
    # hotspots command lists (same ids, peaks and areas), from the same stored analytic field.
    path = _survey(tmp_path, "box", ["bin", "tray"])
    code, out, err = _run(capsys, "hotspots", path, "--json")
    assert code == 0, err
    listed = {h["id"]: h for h in json.loads(out)["hotspots"]}
    gpkg = tmp_path / "box.gpkg"
    code, out, err = _run(capsys, "export", path, gpkg)
    assert code == 0, err
    assert "field model: stored in the survey" in out
    layer = pyogrio.read_dataframe(gpkg, layer="hotspots")
    exported = {row.hotspot_id: row for row in layer.itertuples() if row.hotspot_id in listed}
    assert set(exported) == set(listed)
    for hid, h in listed.items():
        assert exported[hid].peak_v_per_m == pytest.approx(h["peak_v_per_m"], rel=1e-12)
        assert exported[hid].area_m2 == pytest.approx(h["area_m2"], rel=1e-9)
    # The peak of the positive charge is under it (closed form, Griffiths sec. 3.2.1).
    neg = next(h for h in listed.values() if h["polarity"] == "negative")
    assert np.hypot(neg["peak_x"] - 2.5, neg["peak_y"] - 3.0) <= 0.1


def test_export_warns_like_hotspots_about_a_stale_or_missing_model(tmp_path, capsys):
    stale = _survey(tmp_path, "stale", ["bin"])
    with Survey.open(stale, write=True) as survey:
        survey.add_reading(NewReading(9.5, 5.5, 10.0, "V/m", 10.0))
    code, out, err = _run(capsys, "export", stale, tmp_path / "stale.gpkg")
    assert code == 0, err
    assert "older than the latest change" in err and "method kriging" in err
    missing = _survey(tmp_path, "missing", ["bin"], store=False)
    code, out, err = _run(capsys, "export", missing, tmp_path / "missing.gpkg")
    assert code == 0, err
    assert "no field model stored in the survey" in err
