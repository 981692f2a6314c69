"""A progress bar on stderr for long work, silent for small inputs."""
from __future__ import annotations

from contextlib import contextmanager
from typing import Callable, Iterator

from rich.console import Console
from rich.progress import BarColumn, DownloadColumn, Progress, TextColumn, TimeRemainingColumn

#: Inputs smaller than this get no bar: it would only flicker.
MIN_BYTES_FOR_BAR = 4 << 20


@contextmanager
def byte_progress(total: int, label: str, enabled: bool = True) -> Iterator[Callable[[int], None]]:
    """Yield an ``advance(n_bytes)`` function that drives a bar on stderr."""
    if not enabled or total < MIN_BYTES_FOR_BAR:
        yield lambda n: None
        return
    progress = Progress(TextColumn("{task.description}"), BarColumn(), DownloadColumn(),
                        TimeRemainingColumn(), console=Console(stderr=True), transient=True)
    with progress:
        task = progress.add_task(label, total=total)
        pending = 0

        def advance(n: int) -> None:
            nonlocal pending
            pending += n
            if pending >= 1 << 20:
                progress.update(task, advance=pending)
                pending = 0

        yield advance


@contextmanager
def step_progress(total: int, label: str, enabled: bool = True) -> Iterator[Callable[[int], None]]:
    """Yield ``advance(n_steps)`` for work counted in steps (queries, runs)."""
    if not enabled:
        yield lambda n=1: None
        return
    progress = Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                        TimeRemainingColumn(), console=Console(stderr=True), transient=True)
    with progress:
        task = progress.add_task(label, total=total)
        yield lambda n=1: progress.update(task, advance=n)
