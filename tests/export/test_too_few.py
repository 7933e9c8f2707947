"""Too few readings for a field model: export what it can, say why, exit 0."""

from __future__ import annotations

import sqlite3

import pyogrio

from mapper.survey.store import NewReading, Survey
from mapper.workflow import MIN_FIELD_POSITIONS
from tests.export.helpers import run_cli


def test_export_without_field(tmp_path, box_survey, capsys):
    with Survey.open(box_survey, write=True) as survey:
        survey.add_readings([
            NewReading(x=1.0 + i, y=2.0, entered_value=100.0 * i, entered_unit="V/m", value_v_per_m=100.0 * i)
            for i in range(MIN_FIELD_POSITIONS - 1)
        ])
    out = tmp_path / "few.gpkg"
    stale = tmp_path / "few.tif"
    stale.write_bytes(b"old")
    status = run_cli(["export", str(box_survey), str(out), "--csv", str(tmp_path / "few.csv")])
    text = capsys.readouterr().out
    assert status == 0
    assert "no field layers" in text and f"{MIN_FIELD_POSITIONS} or more distinct positions" in text
    layers = {name for name, _ in pyogrio.list_layers(out)}
    assert layers == {"readings", "site", "zones", "assets", "survey_metadata", "layer_styles"}
    assert len(pyogrio.read_dataframe(out, layer="readings")) == MIN_FIELD_POSITIONS - 1
    assert not stale.exists()  # an older GeoTIFF must not pass for this survey's field
    conn = sqlite3.connect(out)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    reason = conn.execute(
        "SELECT value FROM survey_metadata WHERE section = 'field' AND key = 'reason'").fetchone()[0]
    assert "distinct positions" in reason
    conn.close()
    assert (tmp_path / "few.csv").read_text().count("\n") == MIN_FIELD_POSITIONS  # header + rows


def test_report_without_field(tmp_path, box_survey):
    out = tmp_path / "empty.pdf"
    assert run_cli(["report", str(box_survey), str(out)]) == 0
    import pypdfium2 as pdfium

    doc = pdfium.PdfDocument(out)
    text = doc[0].get_textpage().get_text_range()
    assert "No field map" in text
    doc.close()
