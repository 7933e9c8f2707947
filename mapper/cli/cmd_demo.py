"""``mapper demo``: run the whole job on the bundled indoor sample site."""

from __future__ import annotations

from pathlib import Path

from mapper.cli.commands import summary
from mapper.cli.common import show
from mapper.demo import run_demo


def register(sub) -> None:
    p = sub.add_parser("demo", help=summary('demo'))
    p.add_argument("--out", default="demo_out", help="output folder (default demo_out)")
    p.set_defaults(func=run)


def run(args) -> int:
    for note in run_demo(Path(args.out)):
        show([note])
    return 0
