"""The PDF report: pages, sections, real text, and a page 1 that is not blank."""

from __future__ import annotations

import numpy as np
import pypdfium2 as pdfium
import pytest

from mapper.export.report import SECTIONS, write_report
from mapper.features import CAUTIONS
from mapper.units import format_field


@pytest.fixture(scope="module")
def report(hall, tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    result = write_report(hall["products"], folder / "hall.pdf", png_path=folder / "hall.png")
    doc = pdfium.PdfDocument(result.pdf)
    texts = [doc[i].get_textpage().get_text_range() for i in range(len(doc))]
    yield {"result": result, "doc": doc, "texts": texts, "products": hall["products"]}
    doc.close()


def _flat(text: str) -> str:
    return " ".join(text.split())


def test_pages_and_sections(report):
    # The sample hall's field model is the physical one, so a third page lists its sources.
    assert len(report["doc"]) == report["result"].pages == 3
    page1, page2, page3 = (_flat(t) for t in report["texts"])
    p = report["products"]
    assert "likely charged objects" in page3 and "belt 1" in page3
    assert "What the survey cannot tell" in page3
    assert "electrostatic field map" in page1
    assert f"field estimate ({p.display_unit})" in page1  # labelled colour bar in the display unit
    assert "action level" in page1 and "N" in page1  # north arrow: the sample is georeferenced
    assert "10 m" in page1  # scale bar
    for h in p.findings.hotspots:
        assert h.id in page1 and h.id in page2
    # contour labels as text; a label is left out where it would crowd an earlier one (hotspot
    # ids first), so at least most of the long lines carry theirs
    long_lines = [i.label for i in p.findings.isolines if i.length_m > 8.0]
    assert long_lines
    shown = [label for label in long_lines if label.replace(" ", "") in page1.replace(" ", "")]
    assert len(shown) >= 0.5 * len(long_lines), (shown, long_lines)
    for section in SECTIONS:
        assert section in page2, section
    assert "RH 29–34 %" in page2  # the sample's conditions
    assert format_field(p.threshold_v_per_m, p.display_unit) in page2
    assert p.grid.method in page2 and "RMSE" in page2
    # Each caution is there as text (compare the first words; the box wraps lines).
    for caution in CAUTIONS:
        assert " ".join(caution.split()[:6]) in page2


def test_text_is_embedded_truetype(report):
    data = report["result"].pdf.read_bytes()
    assert b"/FontFile2" in data  # pdf.fonttype 42: TrueType fonts embedded, text stays text
    assert b"/Type3" not in data


def test_page_one_renders_not_blank(report, tmp_path):
    image = report["doc"][0].render(scale=1.0).to_pil().convert("RGB")
    out = tmp_path / "page1.png"
    image.save(out)
    pixels = np.asarray(image).reshape(-1, 3)
    non_white = (pixels < 245).any(axis=1).mean()
    colours = len(np.unique(pixels // 16, axis=0))
    # A map page is mostly ink: bands cover the site (over a third of the page here).
    assert non_white > 0.25, non_white
    assert colours > 30, colours
    # Both sides of the diverging ramp appear: bluish and reddish pixels (the sample has negative
    # and positive bands; the palest band colours differ by about 30 between red and blue).
    r, b = pixels[:, 0].astype(int), pixels[:, 2].astype(int)
    assert ((b - r) > 20).mean() > 0.01 and ((r - b) > 20).mean() > 0.01


def test_png_map_alone(report):
    from PIL import Image

    png = report["result"].png
    with Image.open(png) as im:
        assert im.size[0] > 1500 and im.size[0] > im.size[1]  # A4 landscape at 160 dpi


def test_point_assets_are_drawn_not_a_crash(hall, tmp_path):
    # A pillar given as a POINT asset beside the hall's lines and polygons: the report draws and
    # labels it instead of failing.
    import dataclasses

    import shapely

    from mapper.site.model import Asset

    p = hall["products"]
    site = dataclasses.replace(p.site, assets=(*p.site.assets, Asset("pillar P1", "pillar", shapely.Point(20, 4))))
    result = write_report(dataclasses.replace(p, site=site), tmp_path / "points.pdf")
    doc = pdfium.PdfDocument(result.pdf)
    assert "pillar P1" in doc[0].get_textpage().get_text_range()
    doc.close()


def test_failed_report_leaves_the_earlier_one_whole(hall, tmp_path, monkeypatch):
    # Written beside the target and renamed into place: a run that dies while writing neither
    # truncates the earlier report nor leaves a partial file under the final name.
    from matplotlib.backends import backend_pdf

    target = tmp_path / "hall.pdf"
    write_report(hall["products"], target)
    good = target.read_bytes()

    def dying(self, *args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(backend_pdf.PdfPages, "savefig", dying)
    from mapper.errors import MapperError

    with pytest.raises(MapperError, match="(?i)no space left") as err:
        write_report(hall["products"], target)
    assert str(target) in str(err.value.where)
    assert target.read_bytes() == good
    assert sorted(p.name for p in tmp_path.iterdir()) == ["hall.pdf"]


def test_report_states_zone_results_sign_and_height(report):
    page2 = _flat(report["texts"][1])
    assert "Zones" in page2 and "packing EPA (limit" in page2
    assert ("EXCEEDED by" in page2) or ("passed" in page2)
    assert "Meter sign: physics convention" in page2
    assert "Measurement height: 1.00 m" in page2  # the sample's readings carry height_m = 1.00


def test_times_are_local_with_their_offset(report):
    # The sample hall's site file says timezone = "Europe/Berlin"; its first reading is at
    # 07:30 UTC on 17 November, when Berlin keeps CET, UTC+01:00 (IANA tz database).
    page1 = _flat(report["texts"][0])
    assert "2026-11-17 08:30" in page1 and "Europe/Berlin (UTC+01:00)" in page1
