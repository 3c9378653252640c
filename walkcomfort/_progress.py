"""One progress bar for every long loop (rich), quiet when asked or not on a terminal."""

from __future__ import annotations

import os
import sys
from collections.abc import Iterable, Iterator
from typing import TypeVar

T = TypeVar("T")


def progress_enabled() -> bool:
    if os.environ.get("WALKCOMFORT_NO_PROGRESS"):
        return False
    return sys.stderr.isatty()


def track(iterable: Iterable[T], description: str, total: int | None = None,
          enabled: bool | None = None) -> Iterator[T]:
    """Iterate with a rich progress bar on stderr (no bar when disabled or not a TTY)."""
    if enabled is None:
        enabled = progress_enabled()
    if not enabled:
        yield from iterable
        return
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )

    if total is None:
        try:
            total = len(iterable)  # type: ignore[arg-type]
        except TypeError:
            total = None
    with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), TimeRemainingColumn(), transient=False,
                  console=_console()) as bar:
        task = bar.add_task(description, total=total)
        for item in iterable:
            yield item
            bar.advance(task)


def _console():
    from rich.console import Console

    return Console(stderr=True)
