"""Run ``mapper`` commands in forked children and SIGKILL them at chosen moments (for test_kill.py).

Run as ``python -m tests.cli.kill_server JOB.json``. The server imports mapper once, makes the
earlier outputs, runs each command to completion (timing it), then for every trial forks a
child that runs the same ``mapper.cli.main.main`` as the ``mapper`` command and kills it with
SIGKILL, either after a random delay over the whole run or a random moment after its temporary
output file appears. A forked child skips only the interpreter start, so the kills fall in the
command's own work. Results go to standard output as JSON.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import random
import signal
import sys
import time
from pathlib import Path


def _run(argv: list[str]) -> int:
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        from mapper.cli.main import main

        return main(argv)


def _part_files(folder: Path, pid: int) -> list[Path]:
    return [p for p in folder.iterdir() if f".part-{pid}" in p.name]


def _stat(path: Path) -> tuple | None:
    try:
        st = path.stat()
    except OSError:
        return None
    return st.st_ino, st.st_size, st.st_mtime_ns


def _trial(argv: list[str], folder: Path, out: Path, mode: str, delay: float) -> dict:
    before = _stat(out)
    pid = os.fork()
    if pid == 0:  # the child: the mapper command
        os._exit(_run(argv))
    start = time.monotonic()
    if mode == "while-writing":
        # wait until the command starts writing (a temporary file appears, or the output itself
        # changes, as it would with a writer that is not atomic), then a random moment more
        while not _part_files(folder, pid) and _stat(out) == before and time.monotonic() - start < 60:
            if os.waitpid(pid, os.WNOHANG) != (0, 0):
                return {"killed_at_s": None, "part_seen": False, "finished": True}
            time.sleep(0.0005)
    time.sleep(delay)
    writing = bool(_part_files(folder, pid))
    os.kill(pid, signal.SIGKILL)
    _, status = os.waitpid(pid, 0)
    killed = os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
    return {"killed_at_s": time.monotonic() - start, "part_seen": writing, "finished": not killed}


def main(job_path: str) -> None:
    job = json.loads(Path(job_path).read_text())
    rng = random.Random(job["seed"])
    took = {}
    for argv in job["prepare"]:  # earlier outputs, made complete (and the lazy imports warmed)
        start = time.monotonic()
        if _run(argv) != 0:
            raise SystemExit(f"preparing run {argv} failed")
        took[argv[0]] = time.monotonic() - start
    for src, dst in job["copies"]:
        Path(dst).write_bytes(Path(src).read_bytes())
    results = {}
    for name, spec in job["commands"].items():
        full_s = took.get(name, 0.0)  # how long a run takes, from the earlier output
        if spec.get("complete"):  # the new output, complete, for comparison
            start = time.monotonic()
            if _run(spec["complete"]) != 0:
                raise SystemExit(f"{name}: complete run failed")
            full_s = time.monotonic() - start
        trials = []
        for trial in spec["trials"]:
            delay = rng.uniform(0, full_s) if trial["mode"] == "random" else rng.uniform(0, trial["window_s"])
            trials.append(_trial(trial["argv"], Path(trial["folder"]), Path(trial["out"]), trial["mode"], delay))
        after = spec.get("after")  # a complete run in a folder a killed run left its leftovers in
        code = _run(after) if after else 0
        results[name] = {"full_s": full_s, "trials": trials, "after_exit": code}
    print(json.dumps(results))


if __name__ == "__main__":
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    main(sys.argv[1])
