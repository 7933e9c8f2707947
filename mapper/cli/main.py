"""Entry point of the ``mapper`` command."""

from __future__ import annotations

import importlib
import os
import sys
from collections.abc import Sequence

from mapper import __version__
from mapper.cli.commands import COMMANDS as COMMAND_TABLE
from mapper.cli.common import Parser
from mapper.errors import MapperError

#: Sub-command modules, in the order ``mapper --help`` lists them. Each has ``register(sub)``.
COMMANDS = tuple(module for module, _ in COMMAND_TABLE.values())


def _command_word(argv: Sequence[str]) -> str | None:
    """The sub-command named on the command line (the first word not starting with ``-``)."""
    for word in argv:
        if not word.startswith("-"):
            return word if word in COMMAND_TABLE else None
    return None


def build_parser(only: str | None = None) -> Parser:
    """The argument parser.

    Parameters
    ----------
    only : str, optional
        Import and register this sub-command in full; the others get a placeholder that carries
        their one-line help (so ``mapper --help`` and a mistyped command need no numerical
        imports). Default: every sub-command in full.
    """
    parser = Parser(
        prog="mapper",
        description="Electrostatic field surveys: plan a grid, record readings, map the field, "
        "outline hotspots, export GIS layers and a report.",
    )
    parser.add_argument("--version", action="version", version=f"mapper {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    sub.required = True
    for name, (module, text) in COMMAND_TABLE.items():
        if only is None or name == only:
            importlib.import_module(f"mapper.cli.{module}").register(sub)
        else:
            sub.add_parser(name, help=text, add_help=False)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    User errors print one line (``mapper: error: WHERE: WHAT``) and return 2. Unexpected errors
    print one line too, unless ``MAPPER_DEBUG=1`` asks for the traceback.
    """
    words = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(only=_command_word(words) or "")
    args = parser.parse_args(words)
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
