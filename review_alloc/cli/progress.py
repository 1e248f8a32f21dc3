"""Progress of long work (plan, import, report) on standard error, only at a terminal.

A spinner with the step under way and the time spent, drawn by rich, so a chair planning a
large venue sees that something is happening. Nothing is drawn when standard error is not a
terminal (a script, a log file) or when `--json` was asked for: the output a script reads stays
exactly what it was.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from rich.live import Live
    from rich.spinner import Spinner


class Steps:
    """The step shown; `step(text)` moves on to the next one."""

    def __init__(self, live: Live | None = None, spinner: Spinner | None = None) -> None:
        self._live = live
        self._spinner = spinner
        self._start = time.monotonic()

    @property
    def shown(self) -> bool:
        """Whether anything is drawn (standard error is a terminal and no --json)."""
        return self._live is not None

    def step(self, text: str) -> None:
        """Show `text` as the work under way, with the seconds spent so far."""
        if self._live is not None and self._spinner is not None:
            spent = time.monotonic() - self._start
            self._spinner.update(text=f"{text} [dim]({spent:.1f} s)[/dim]")
            # Drawn now, not at the next tick: a short step is still seen once.
            self._live.refresh()


def wanted(json_output: bool) -> bool:
    """Whether progress is drawn: standard error is a terminal and the output is not JSON."""
    isatty = getattr(sys.stderr, "isatty", None)
    return not json_output and callable(isatty) and bool(isatty())


@contextmanager
def progress(first: str, *, json_output: bool = False) -> Iterator[Steps]:
    """Show a spinner on standard error while the block runs (see `wanted`); it is wiped
    when the block ends, so the command's own report follows on a clean line."""
    if not wanted(json_output):
        yield Steps()
        return
    # rich is imported only when something is drawn: a script's run pays nothing for it.
    from rich.console import Console
    from rich.live import Live
    from rich.spinner import Spinner

    console = Console(file=sys.stderr, force_terminal=True)
    spinner = Spinner("dots", text=first, style="green")
    with Live(spinner, console=console, transient=True, refresh_per_second=10) as live:
        steps = Steps(live, spinner)
        steps.step(first)
        yield steps
