"""Helpers shared by the sub-commands: argument types, printing, opening surveys."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

from mapper.atomic_file import output_path
from mapper.errors import MapperError
from mapper.units import canonical_unit, format_field, parse_threshold_text


class Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line, with the command named."""

    def error(self, message: str) -> None:  # pragma: no cover - exercised through main()
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def unit_arg(text: str) -> str:
    """argparse type: a field unit."""
    try:
        return canonical_unit(text)
    except MapperError as exc:
        raise argparse.ArgumentTypeError(exc.message) from None


def threshold_arg(text: str) -> float:
    """argparse type: an action level, in V/m when it has a unit; a bare number stays a
    :class:`~mapper.units.BareNumber`, read in the survey's display unit (as the app reads it)."""
    try:
        return parse_threshold_text(text)
    except MapperError as exc:
        raise argparse.ArgumentTypeError(exc.message) from None


def positive_float(text: str) -> float:
    """argparse type: a positive finite number."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not (value > 0 and value < float("inf")):
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive number")
    return value


def neighbors_arg(text: str) -> int:
    """argparse type: a neighbourhood size, a whole number of at least 3 readings."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 3:
        raise argparse.ArgumentTypeError(f"{text!r} is too small; a neighbourhood needs at least 3 readings")
    return value


def role_arg(text: str) -> tuple[str, str]:
    """argparse type: ``LAYER=ROLE``."""
    if "=" not in text:
        raise argparse.ArgumentTypeError(f"{text!r} should be LAYER=ROLE, e.g. boundary=outline")
    layer, role = (part.strip() for part in text.split("=", 1))
    if not layer or not role:
        raise argparse.ArgumentTypeError(f"{text!r} should be LAYER=ROLE with both parts, e.g. boundary=outline")
    return layer, role


def say(*parts: object) -> None:
    """Print to standard output."""
    print(*parts)


def warn(message: str) -> None:
    """Print a warning line to standard error."""
    print(f"mapper: warning: {message}", file=sys.stderr)


def table(rows: Sequence[Sequence[object]], header: Sequence[str]) -> str:
    """Format a plain text table with aligned columns."""
    cells = [[str(h) for h in header]] + [[str(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(header))]
    lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() for r in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def fmt(value_v_per_m: float | None, unit: str) -> str:
    """A field value in the display unit, or a dash."""
    return "-" if value_v_per_m is None else format_field(value_v_per_m, unit)


def print_notes(products) -> None:
    """Print a run's notes (:class:`mapper.workflow.Note`): remarks to stdout, warnings to stderr.

    The no-field reason is left to the command, which says it where the map would be.
    """
    for note in products.notes:
        if note.level == "remark":
            say(note.text)
        elif note.level == "warning":
            warn(note.text)


def show(notes) -> None:
    """Print notes (:class:`mapper.workflow.Note`) in order: remarks to stdout, warnings to stderr."""
    for note in notes:
        if note.level == "warning":
            warn(note.text)
        else:
            say(note.text)


def check_output(path: str, suffix: str, option: str | None = None) -> Path:
    """Refuse an output name or folder before any work is done."""
    return output_path(path, suffix, option)
