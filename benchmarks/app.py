"""Terminal-app benchmark: Enter-to-saved latency and the live refit + redraw.

Usage::

    .venv/bin/python benchmarks/app.py                 # 5 000 and 100 000 readings, 2 000 for the refit
    .venv/bin/python benchmarks/app.py --entries 100   # more Enter presses
    .venv/bin/python benchmarks/app.py --large 0       # leave out the 100 000-reading survey

Targets (issue 6): from Enter to "saved" on screen under 50 ms with 5 000 readings in the
survey; the live refit and redraw for 2 000 readings under 0.5 s, in a worker. At 100 000
readings (the redesign issue): Enter to "saved" under 50 ms median, the first screen under 2 s,
the map as soon as it can be (under 9 s).

The app runs headless (Textual's ``run_test``) at 160 x 50 on the sample hall (336 points at
2 m). The survey file lives in a temporary folder on the machine's disk (``synchronous=FULL``, so
each reading's commit includes an fsync).

Figures:

* commit: ``Survey.add_reading`` alone (parse excluded).
* Enter to saved: from the entry line's Submitted handler to the status line updated and every
  panel and the map redrawn (what the user sees on the next frame).
* Enter to frame written: from sending the Enter key to the first frame Textual writes to the
  terminal driver after the handler has finished (``App._display``), i.e. the status line
  showing "saved" is on the screen.
* first screen: from opening the survey file to the first frame written with the main screen
  on it (its status line saying "opened").
* map shown: from opening the survey file to the first frame written after the first live
  result (with a field grid) reached the map.
* refit: the worker's :func:`mapper.workflow.live_products` (field engine fast path + hotspots +
  suggestions) on 2 000 readings, made ready to draw (:func:`mapper.app.map_data.prepare_live_map`);
  redraw: applying the result on the UI thread.

Readings are invented: a charged conveyor modelled as a Gaussian ridge of 6 kV/m plus white
noise of 50 V/m, at random positions inside the hall.
"""

from __future__ import annotations

import argparse
import asyncio
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import shapely

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from mapper import workflow as live  # noqa: E402
from mapper.app.main_screen import MainScreen  # noqa: E402
from mapper.app.map_data import prepare_live_map  # noqa: E402
from mapper.app.walk_app import WalkApp  # noqa: E402
from mapper.survey.create import create_survey  # noqa: E402
from mapper.survey.store import NewReading, Survey  # noqa: E402

SITE = ROOT / "sample_sites" / "north_hall.toml"


def invented_readings(survey: Survey, n: int, seed: int = 7) -> list[NewReading]:
    """``n`` field readings inside the site: a charged belt ridge plus noise, V/m."""
    rng = np.random.default_rng(seed)
    outline = survey.site.outline
    minx, miny, maxx, maxy = outline.bounds
    out: list[NewReading] = []
    while len(out) < n:
        x, y = rng.uniform(minx, maxx), rng.uniform(miny, maxy)
        if not outline.covers(shapely.Point(x, y)):
            continue
        v = 6000.0 * np.exp(-((y - 8.0) ** 2) / 4.0) * (8 <= x <= 34) + rng.normal(0, 50)
        out.append(NewReading(x=x, y=y, entered_value=float(v), entered_unit="V/m", value_v_per_m=float(v)))
    return out


def make_survey(path: Path, n: int) -> None:
    """A survey of the sample hall at 2 m holding ``n`` invented field readings."""
    with create_survey(path, SITE, spacing_m=2.0) as survey:
        survey.add_readings(invented_readings(survey, n), source="benchmark")


async def settle(app: WalkApp) -> None:
    """Wait for the live refit; one cancelled by a newer refit is fine."""
    from textual.worker import WorkerCancelled

    for _ in range(20):
        try:
            await app.workers.wait_for_complete()
            return
        except WorkerCancelled:
            continue


def pct(values: list[float], q: float) -> float:
    return float(np.percentile(values, q))


async def enter_latency(path: Path, entries: int) -> dict:
    survey = Survey.open(path, write=True)
    app = WalkApp(survey, ask_conditions=False)
    handler_ms: list[float] = []
    commit_ms: list[float] = []
    async with app.run_test(size=(160, 50)) as pilot:
        await settle(app)
        main = next(s for s in app.screen_stack if isinstance(s, MainScreen))
        session = app.session
        original_record = main.record
        original_add = survey.add_reading

        handler_end: list[float] = []
        frames: list[float] = []
        original_display = app._display

        def timed_record(text: str) -> None:
            t0 = time.perf_counter()
            original_record(text)
            handler_end.append(time.perf_counter())
            handler_ms.append((handler_end[-1] - t0) * 1e3)

        def timed_display(screen, renderable) -> None:
            original_display(screen, renderable)
            if renderable is not None:
                frames.append(time.perf_counter())

        app._display = timed_display

        def timed_add(reading, source="entry"):
            t0 = time.perf_counter()
            stored = original_add(reading, source)
            commit_ms.append((time.perf_counter() - t0) * 1e3)
            return stored

        main.record = timed_record
        survey.add_reading = timed_add
        press_ms: list[float] = []
        paint_ms: list[float] = []
        for k in range(entries):
            await pilot.press(*f"{k % 90 + 10}")
            t0 = time.perf_counter()
            await pilot.press("enter")
            assert main.last_status.startswith("saved"), main.last_status
            shown = next(t for t in frames if t >= handler_end[-1])
            press_ms.append((shown - t0) * 1e3)
            paint_ms.append((shown - handler_end[-1]) * 1e3)
            await pilot.pause(0.15)  # the refit starts 0.1 s after the reading
            # Keep the refit from overlapping the next entry's timing on 2 cores.
            await settle(app)
        readings = len(session.field_readings())
        await pilot.press("ctrl+q")
    survey.close()
    return {
        "readings_in_survey": readings,
        "commit_ms": (statistics.median(commit_ms), pct(commit_ms, 95)),
        "handler_ms": (statistics.median(handler_ms), pct(handler_ms, 95)),
        "press_ms": (statistics.median(press_ms), pct(press_ms, 95)),
        "paint_ms": (statistics.median(paint_ms), pct(paint_ms, 95)),
    }


async def open_and_map(path: Path) -> dict:
    """Seconds from opening the survey to the first screen, and to the first map with a field."""
    frames: list[tuple[float, bool, bool]] = []
    t0 = time.perf_counter()
    survey = Survey.open(path, write=True)
    app = WalkApp(survey, ask_conditions=False)
    original_display = app._display

    def timed_display(screen, renderable) -> None:
        original_display(screen, renderable)
        if renderable is not None and isinstance(screen, MainScreen):
            frames.append((time.perf_counter(), screen.last_status.startswith("opened"),
                           screen.live is not None and screen.live.grid is not None))

    app._display = timed_display
    async with app.run_test(size=(160, 50)) as pilot:
        for _ in range(1200):
            if any(mapped for _, _, mapped in frames):
                break
            await pilot.pause(0.05)
        main = next(s for s in app.screen_stack if isinstance(s, MainScreen))
        live_result = main.live
        await settle(app)
        await pilot.press("ctrl+q")
    survey.close()
    first = next(t for t, opened, _ in frames if opened)
    mapped = next((t for t, _, m in frames if m), float("nan"))
    return {
        "readings": live_result.readings if live_result else 0,
        "engine": live_result.engine if live_result else "",
        "first_screen_s": first - t0,
        "map_s": mapped - t0,
    }


def first_screen_process(path: Path, timeout_s: float = 120.0) -> float:
    """Seconds from starting ``mapper walk`` in a fresh process on a pseudo-terminal (160 x 50)
    to its output saying the survey was opened (what a person waits for)."""
    import fcntl
    import os
    import pty
    import select
    import signal
    import struct
    import subprocess
    import termios

    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 50, 160, 0, 0))
    env = dict(os.environ, TERM="xterm-256color", COLUMNS="160", LINES="50", PYTHONPATH=str(ROOT))
    env.pop("TEXTUAL", None)
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "mapper", "walk", str(path), "--no-conditions"],
                            stdin=slave, stdout=slave, stderr=slave, cwd=ROOT, env=env, start_new_session=True)
    os.close(slave)
    seen = b""
    shown = float("nan")
    try:
        while time.perf_counter() - t0 < timeout_s:
            ready, _, _ = select.select([master], [], [], 0.05)
            if ready:
                try:
                    chunk = os.read(master, 65536)
                except OSError:
                    break
                seen = seen[-4096:] + chunk
                if b"opened" in seen:
                    shown = time.perf_counter() - t0
                    break
            if proc.poll() is not None:
                break
    finally:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
        os.close(master)
    return shown


async def refit_redraw(path: Path, repeats: int) -> dict:
    survey = Survey.open(path, write=True)
    app = WalkApp(survey, ask_conditions=False)
    async with app.run_test(size=(160, 50)) as pilot:
        await settle(app)
        main = next(s for s in app.screen_stack if isinstance(s, MainScreen))
        s = app.session
        readings = list(s.readings.values())
        refit_s, redraw_s = [], []
        result = None
        for _ in range(repeats):
            t0 = time.perf_counter()
            result = live.live_products(readings, s.site, s.threshold_v_per_m, s.points)
            ready = prepare_live_map(result, readings, s.sign_convention, s.plan.spacing_m)
            refit_s.append(time.perf_counter() - t0)
            main.live = None
            t0 = time.perf_counter()
            main._apply_live(ready)
            redraw_s.append(time.perf_counter() - t0)
        # And through the real worker: from start to the map showing the new result.
        worker_s = []
        for _ in range(repeats):
            main.live = None
            t0 = time.perf_counter()
            main.start_refit()
            await settle(app)
            await pilot.pause()
            worker_s.append(time.perf_counter() - t0)
            assert main.live is not None
        await pilot.press("ctrl+q")
    survey.close()
    return {
        "readings": len([r for r in readings if r.kind == "field"]),
        "engine": result.engine,
        "hotspots": result.hotspot_count,
        "refit_s": (statistics.median(refit_s), max(refit_s)),
        "redraw_s": (statistics.median(redraw_s), max(redraw_s)),
        "worker_s": (statistics.median(worker_s), max(worker_s)),
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--readings", type=int, default=5000, help="readings in the survey for the latency")
    parser.add_argument("--refit-readings", type=int, default=2000, help="readings for the refit")
    parser.add_argument("--entries", type=int, default=40, help="Enter presses timed")
    parser.add_argument("--repeats", type=int, default=5, help="refits timed")
    parser.add_argument("--large", type=int, default=100_000, help="readings of the large survey (0: none)")
    parser.add_argument("--large-entries", type=int, default=15, help="Enter presses timed on the large survey")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(dir=ROOT / "benchmarks") as tmp:
        tmp = Path(tmp)
        make_survey(tmp / "latency.survey", args.readings)
        make_survey(tmp / "refit.survey", args.refit_readings)
        lat = asyncio.run(enter_latency(tmp / "latency.survey", args.entries))
        fit = asyncio.run(refit_redraw(tmp / "refit.survey", args.repeats))
        if args.large:
            make_survey(tmp / "large.survey", args.large)
            opened = asyncio.run(open_and_map(tmp / "large.survey"))
            opened["process_s"] = first_screen_process(tmp / "large.survey")
            large = asyncio.run(enter_latency(tmp / "large.survey", args.large_entries))
    print_latency(lat)
    print(f"Live refit + redraw, {fit['readings']} readings (target < 0.5 s): {fit['engine']}, "
          f"{fit['hotspots']} hotspots")
    print(f"  refit in worker             median {fit['refit_s'][0]:6.3f} s    max {fit['refit_s'][1]:6.3f} s")
    print(f"  redraw on UI thread         median {fit['redraw_s'][0]:6.3f} s    max {fit['redraw_s'][1]:6.3f} s")
    print(f"  worker start to map shown   median {fit['worker_s'][0]:6.3f} s    max {fit['worker_s'][1]:6.3f} s")
    if args.large:
        print(f"Opening a survey of {opened['readings']} field readings: {opened['engine']}")
        print(f"  first screen                {opened['first_screen_s']:6.2f} s   (target < 2 s)")
        print(f"  first screen, fresh process {opened['process_s']:6.2f} s   (start-up included)")
        print(f"  map shown                   {opened['map_s']:6.2f} s   (target < 9 s)")
        print_latency(large)


def print_latency(lat: dict) -> None:
    print(f"Enter to saved, {lat['readings_in_survey']} field readings in the survey (target < 50 ms):")
    print(f"  commit (add_reading)        median {lat['commit_ms'][0]:6.1f} ms   p95 {lat['commit_ms'][1]:6.1f} ms")
    print(f"  handler to status + redraw  median {lat['handler_ms'][0]:6.1f} ms   p95 {lat['handler_ms'][1]:6.1f} ms")
    print(f"  Enter to frame written      median {lat['press_ms'][0]:6.1f} ms   p95 {lat['press_ms'][1]:6.1f} ms")
    print(f"    of which handler to frame median {lat['paint_ms'][0]:6.1f} ms   p95 {lat['paint_ms'][1]:6.1f} ms")


if __name__ == "__main__":
    main()
