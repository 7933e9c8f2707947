"""A spinner with the current step on stderr while a long command works.

Shown only when stderr is a terminal, so scripts, pipes and ``--json`` output stay exactly as
they were; rich (installed with Textual) draws it.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager


@contextmanager
def working(what: str) -> Iterator[Callable[[str], None]]:
    """Show ``what`` with a spinner until the block ends; yields ``step(text)`` to name the step.

    Parameters
    ----------
    what : str
        What the command is doing, e.g. ``"report"``.
    """
    if not sys.stderr.isatty():
        yield lambda _step: None
        return
    from rich.console import Console

    console = Console(stderr=True)
    with console.status(f"{what}…") as status:
        yield lambda step: status.update(f"{what}: {step}…")


__all__ = ["working"]
