"""Entry point of the ``mapper`` command."""

from __future__ import annotations

import importlib
import os
import sys
from collections.abc import Sequence

from mapper import __version__
from mapper.cli.common import Parser
from mapper.errors import MapperError

#: Sub-command modules, in the order ``mapper --help`` lists them. Each has ``register(sub)``.
COMMANDS = (
    "cmd_new",
    "cmd_import",
    "cmd_info",
    "cmd_meter",
    "cmd_review",
    "cmd_grid",
    "cmd_hotspots",
    "cmd_sources",
    "cmd_compare",
    "cmd_export",
    "cmd_report",
    "cmd_archive",
    "cmd_demo",
    "cmd_walk",
)


def build_parser() -> Parser:
    """The full argument parser."""
    parser = Parser(
        prog="mapper",
        description="Electrostatic field surveys: plan a grid, record readings, map the field, "
        "outline hotspots, export GIS layers and a report.",
    )
    parser.add_argument("--version", action="version", version=f"mapper {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    sub.required = True
    for name in COMMANDS:
        importlib.import_module(f"mapper.cli.{name}").register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    User errors print one line (``mapper: error: WHERE: WHAT``) and return 2. Unexpected errors
    print one line too, unless ``MAPPER_DEBUG=1`` asks for the traceback.
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except MapperError as exc:
        print(f"mapper: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("mapper: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except OSError as exc:
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"mapper: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return 2
    except Exception as exc:  # last resort: never a traceback for the user
        if os.environ.get("MAPPER_DEBUG"):
            raise
        print(
            f"mapper: internal error: {type(exc).__name__}: {exc} (set MAPPER_DEBUG=1 for details)",
            file=sys.stderr,
        )
        return 3


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
