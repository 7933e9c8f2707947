"""SIGKILL of ``mapper report`` and ``mapper export --csv`` at random moments (issue 15).

After every kill the output's final name holds the complete earlier file, the complete new file,
or nothing; never a part. Complete means: a PDF that ends with the ``%%EOF`` marker (ISO 32000-1,
7.5.5) and opens in PDFium (pypdfium2) with the reference's page count; a CSV with the reference's
bytes and row count. Half the trials start with an earlier output in place (the overwrite case),
half with none. Half the kills fall at a random moment of the whole run, half at a random moment
after the command's temporary file appeared, i.e. while it writes. The kills are done by
``tests/cli/kill_server.py`` (forked children, so the trials need no interpreter start each).
"""

from __future__ import annotations

import csv
import io
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pypdfium2 as pdfium
import pytest

from mapper.cli.main import main
from tests.conftest import BOX_SITE, ROOT

TRIALS = 10
READINGS = "x,y,value,unit\n" + "".join(
    f"{x},{y},{(x * 37 + y * 11) % 50 + 5},V/m\n" for x in (1, 3, 5, 7, 9) for y in (1, 3, 5)
)
MORE = "x,y,value,unit\n" + "".join(f"{x},{y},{(x * 13 + y * 7) % 40 + 8},V/m\n" for x in (2, 4, 6, 8, 10)
                                    for y in (2, 4))


@pytest.fixture(scope="module")
def kills(tmp_path_factory) -> dict:
    """Run every trial once for the module; the tests read the results."""
    root = tmp_path_factory.mktemp("kill")
    site = root / "box.toml"
    site.write_text(BOX_SITE)
    old, new = root / "old.survey", root / "new.survey"
    (root / "r.csv").write_text(READINGS)
    (root / "more.csv").write_text(MORE)
    assert main(["new", str(old), "--site", str(site)]) == 0
    assert main(["import", str(old), str(root / "r.csv")]) == 0
    shutil.copy(old, new)
    assert main(["import", str(new), str(root / "more.csv")]) == 0  # 25 readings, the old has 15
    ref = root / "ref"
    ref.mkdir()
    method = ["--method", "idw"]
    commands = {
        "report": ("out.pdf", lambda survey, f, stem="out": ["report", str(survey), str(f / f"{stem}.pdf"), *method]),
        "export": ("out.csv", lambda survey, f, stem="out": ["export", str(survey), str(f / f"{stem}.gpkg"),
                                                             "--csv", str(f / f"{stem}.csv"), *method]),
    }
    servers = {}
    for name, (out, command) in commands.items():
        def argv(folder: Path, command=command) -> list[str]:
            return command(new, folder)

        # the earlier output (from the old survey), then the new one complete, for comparison
        earlier = command(old, ref, "old")
        (ref / f"new_{name}").mkdir()
        job = {"seed": 15, "prepare": [earlier], "copies": [],
               "commands": {name: {"complete": argv(ref / f"new_{name}"), "trials": []}}}
        if name == "export":  # a complete run where a killed one left its temporary files
            job["commands"][name]["after"] = argv(root / f"{name}0")
        for i in range(TRIALS):
            folder = root / f"{name}{i}"
            folder.mkdir()
            if i % 2:  # overwrite case
                job["copies"].append([str(ref / out.replace("out.", "old.")), str(folder / out)])
            mode = "random" if i % 4 < 2 else "while-writing"
            job["commands"][name]["trials"].append(
                {"argv": argv(folder), "folder": str(folder), "out": str(folder / out), "mode": mode, "window_s": 0.2})
        (root / f"{name}.json").write_text(json.dumps(job))
        env = {**os.environ, "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "PYTHONDONTWRITEBYTECODE": "1"}
        env.pop("MAPPER_DEBUG", None)
        # report and export trials run side by side, one server each
        servers[name] = subprocess.Popen([sys.executable, "-m", "tests.cli.kill_server", str(root / f"{name}.json")],
                                         cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    results = {}
    for server in servers.values():
        stdout, stderr = server.communicate(timeout=600)
        assert server.returncode == 0, stderr
        results.update(json.loads(stdout.strip().splitlines()[-1]))
    return {"root": root, "ref": ref, "results": results}


def pdf_pages(data: bytes) -> int | None:
    """Page count of a complete PDF, or None when it is not one."""
    if not data.rstrip().endswith(b"%%EOF"):
        return None
    try:
        return len(pdfium.PdfDocument(data))
    except pdfium.PdfiumError:
        return None


def outcome(name: str, data: bytes | None, ref: Path) -> str:
    if data is None:
        return "absent"
    if name == "report":
        if data == (ref / "old.pdf").read_bytes():
            return "old"
        pages = pdf_pages(data)
        new_pages = pdf_pages((ref / "new_report" / "out.pdf").read_bytes())
        return "new" if pages is not None and pages == new_pages else "part"
    new = (ref / "new_export" / "out.csv").read_bytes()
    return {(ref / "old.csv").read_bytes(): "old", new: "new"}.get(data, "part")


@pytest.mark.parametrize("name", ["report", "export"])
def test_killed_output_is_old_new_or_absent(kills, name):
    root, ref = kills["root"], kills["ref"]
    result = kills["results"][name]
    out = "out.pdf" if name == "report" else "out.csv"
    seen = []
    for i, trial in enumerate(result["trials"]):
        path = root / f"{name}{i}" / out
        got = outcome(name, path.read_bytes() if path.exists() else None, ref)
        seen.append((got, trial["part_seen"], trial["finished"]))
        assert got != "part", (i, trial)
        if i % 2 and got == "absent":  # an earlier output is never lost to a kill
            pytest.fail(f"trial {i}: the earlier {out} vanished")
    if name == "export":  # the complete new CSV holds every reading (25) under its header
        rows = list(csv.reader(io.StringIO((ref / "new_export" / "out.csv").read_text())))
        assert len(rows) == 1 + 25
    # the trials did reach the writing: some kills fell while the temporary file existed
    assert sum(1 for _, writing, _ in seen if writing) >= 2, seen
    assert sum(1 for _, _, finished in seen if not finished) >= TRIALS // 2, seen
    print(f"{name}: full run {result['full_s']:.2f} s; outcomes (result, killed while writing, finished):", seen)


def test_next_run_clears_what_a_killed_run_left(kills):
    # the same atomic_path writes the report; one command's clean-up stands for both
    folder = kills["root"] / "export0"
    assert kills["results"]["export"]["after_exit"] == 0
    assert [p.name for p in folder.iterdir() if ".part-" in p.name] == []
    assert outcome("export", (folder / "out.csv").read_bytes(), kills["ref"]) == "new"
