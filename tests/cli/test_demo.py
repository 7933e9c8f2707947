"""``mapper demo`` goes through the library and says what each command says about the same survey."""

from __future__ import annotations

import pytest

from mapper.cli.main import main
from mapper.demo import run_demo


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    notes = list(run_demo(out))
    sections: dict[str, list[str]] = {}
    current = None
    for note in notes:
        if note.level == "remark" and note.text.startswith("$ mapper "):
            current = note.text.split()[2]  # the command word; later sections of one word extend it
            sections.setdefault(current, [])
            continue
        if note.level == "remark":
            sections[current] += note.text.split("\n")
    return {"out": out, "notes": notes, "sections": sections}


def _said(capsys, argv) -> list[str]:
    capsys.readouterr()
    assert main(argv) == 0
    return capsys.readouterr().out.splitlines()


def test_demo_writes_the_hand_over(demo):
    out = demo["out"]
    for name in ("north_hall.survey", "north_hall_after.survey", "north_hall.gpkg", "north_hall.tif",
                 "north_hall_readings.csv", "north_hall.pdf", "north_hall.png", "north_hall_before_after.gpkg",
                 "north_hall_before_after.pdf"):
        assert (out / name).is_file(), name
    commands = [n.text.split()[2] for n in demo["notes"] if n.text.startswith("$ mapper ")]
    assert commands == ["new", "meter", "import", "import", "info", "grid", "hotspots", "export", "report",
                        "new", "meter", "import", "import", "grid", "compare"]
    assert demo["notes"][-1].text.startswith("wrote ")


def test_demo_says_what_the_commands_say(demo, capsys):
    survey = str(demo["out"] / "north_hall.survey")
    assert demo["sections"]["info"] == _said(capsys, ["info", survey])
    assert demo["sections"]["hotspots"] == _said(capsys, ["hotspots", survey])
    again = str(demo["out"] / "again.gpkg")
    said = _said(capsys, ["export", survey, again, "--csv", str(demo["out"] / "again.csv")])
    expect = [line.replace("again", "north_hall").replace("north_hall.csv", "north_hall_readings.csv")
              for line in said]
    assert demo["sections"]["export"] == expect
