"""``mapper export`` and ``mapper report`` on the command line, and the CSV."""

from __future__ import annotations

import csv

import pytest

from mapper.export.csv_out import CSV_COLUMNS
from tests.export.helpers import run_cli


def test_export_and_report_commands(rotated, tmp_path, capsys):
    survey = str(rotated["survey"])
    out = tmp_path / "cli.gpkg"
    assert run_cli(["export", survey, str(out), "--threshold", "3kV/m", "--csv", str(tmp_path / "r.csv")]) == 0
    text = capsys.readouterr().out
    assert f"wrote {out}" in text and "cli.tif" in text and "EPSG:32633" in text
    assert "field model: built now" in text
    assert "at 3000 V/m:" in text  # the rotated survey displays V/m
    assert out.exists() and out.with_suffix(".tif").exists()
    with open(tmp_path / "r.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert tuple(rows[0]) == CSV_COLUMNS and len(rows) == len(rotated["products"].readings)
    by_id = {c.reading.id: c for c in rotated["products"].readings}
    for row in rows[:20]:
        c = by_id[int(row["reading_id"])]
        assert float(row["value_v_per_m"]) == c.value_v_per_m
        assert float(row["raw_v_per_m"]) == c.reading.value_v_per_m
    pdf = tmp_path / "cli.pdf"
    assert run_cli(["report", survey, str(pdf), "--png"]) == 0
    text = capsys.readouterr().out
    assert pdf.exists() and pdf.with_suffix(".png").exists() and "(2 pages)" in text


def test_export_refuses_bad_output_and_method(rotated, tmp_path, capsys):
    survey = str(rotated["survey"])
    assert run_cli(["export", survey, str(tmp_path / "out.shp")]) == 2
    assert "should end in .gpkg" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        run_cli(["export", survey, str(tmp_path / "a.gpkg"), "--method", "magic"])
    assert run_cli(["export", survey, str(tmp_path / "missing" / "a.gpkg")]) == 2
