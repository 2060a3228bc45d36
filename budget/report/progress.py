"""A progress bar on stderr for long computations (rich), silent when nobody is watching.

The computing core never imports rich: long loops take an optional ``progress(done, total)``
callback. :func:`progress_bar` yields such a callback that drives a rich bar on stderr, or ``None``
when stderr is not a terminal (pipes, CI logs, tests) or the user asked for ``--quiet``.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from typing import Callable, Iterator, TextIO

from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

Callback = Callable[[int, int], None]


def wants_progress(*, quiet: bool, stream: TextIO | None = None) -> bool:
    """True when a bar should be drawn: not quiet, and the stream (stderr) is a terminal."""
    stream = sys.stderr if stream is None else stream
    if quiet:
        return False
    isatty = getattr(stream, "isatty", None)
    return bool(isatty and isatty())


@contextmanager
def progress_bar(description: str, *, quiet: bool = False, stream: TextIO | None = None) -> Iterator[Callback | None]:
    """A ``progress(done, total)`` callback drawing one bar on stderr, or None when silent.

    >>> with progress_bar("copies", quiet=True) as cb:
    ...     cb is None
    True
    """
    if not wants_progress(quiet=quiet, stream=stream):
        yield None
        return
    console = Console(file=sys.stderr if stream is None else stream)
    columns = (
        TextColumn("[bold]{task.description}"),
        BarColumn(),
        MofNCompleteColumn(),
        TimeRemainingColumn(),
    )
    with Progress(*columns, console=console, transient=True) as bar:
        task = bar.add_task(description, total=None)

        def update(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        yield update
