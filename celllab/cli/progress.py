"""Progress of long CLI jobs: a rich progress bar on a terminal, plain lines in a log.

Bars go to stderr and only when stderr is a terminal, so piped output and ``--json`` stay
clean; a log (stderr redirected) gets one line when a stage finishes.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

Callback = Callable[[str, int, int], None]


def on_terminal() -> bool:
    return sys.stderr.isatty()


def progress_callback(verb: str, finished: str = "done") -> Callback:
    """``show(stage, done, total)`` for the engine: one bar per deck on a terminal, one line
    per finished deck in a log."""
    if not on_terminal():
        def log(stage: str, done: int, total: int) -> None:
            if done >= total:
                sys.stderr.write(f"{stage.split(':')[0]}: {total} cells {finished}\n")
                sys.stderr.flush()
        return log
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    progress = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                        TimeElapsedColumn(), console=Console(stderr=True), transient=False)
    tasks: dict[str, Any] = {}

    def show(stage: str, done: int, total: int) -> None:
        deck = stage.split(":")[0]
        if deck not in tasks:
            if not tasks:
                progress.start()
            tasks[deck] = progress.add_task(f"{verb} {deck}", total=max(total, 1))
        progress.update(tasks[deck], completed=done, description=f"{verb} {stage}")
        if done >= total:
            progress.update(tasks[deck], completed=max(total, 1), description=f"{verb} {deck}")
            if all(progress.tasks[i].finished for i in range(len(progress.tasks))):
                progress.stop()

    return show


@contextmanager
def steps(description: str, total: int) -> Iterator[Callable[[int], None]]:
    """``advance(n)`` for a job of ``total`` steps (files written, cells rendered): a bar on a
    terminal, nothing elsewhere."""
    if not on_terminal() or total <= 1:
        yield lambda n=1: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), console=Console(stderr=True), transient=True) as progress:
        task = progress.add_task(description, total=total)
        yield lambda n=1: progress.advance(task, n)


@contextmanager
def working(description: str) -> Iterator[Callable[[str], None] | None]:
    """A spinner with the current stage while one long call runs (a terminal only): yields
    ``say(text)`` that replaces the spinner's text, or None elsewhere."""
    if not on_terminal():
        yield None
        return
    from rich.console import Console

    with Console(stderr=True).status(description) as status:
        yield lambda text: status.update(text)
