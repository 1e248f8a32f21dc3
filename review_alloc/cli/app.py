"""`review-alloc open SESSION` and `review-alloc` alone: the terminal app."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path

from review_alloc.cli.common import EXIT_OK

Handler = Callable[[argparse.Namespace], int]


def register(sub: argparse._SubParsersAction) -> dict[str, Handler]:
    """Add `open` and the no-argument default that opens the demo; return their handlers."""
    p = sub.add_parser("open", help="open a session file in the terminal app")
    p.add_argument("session", type=Path)
    return {"open": _cmd_open, "app": _cmd_app}


def _run(path: Path | None, notice: str | None = None) -> int:
    # Textual is imported only here, so the other commands start without it.
    from review_alloc.tui import make_app

    make_app(path, notice=notice).run()
    return EXIT_OK


def _cmd_open(args: argparse.Namespace) -> int:
    return _run(args.session)


def _cmd_app(args: argparse.Namespace) -> int:
    """No command given: the app on the user's copy of the demo workshop (brought up to date
    with this version's sample unless the chair changed it; what was done is said first)."""
    from review_alloc.workspace import refresh_demo

    _, note = refresh_demo()
    if note:
        # Also on stderr: the app's notice fades, the terminal's scrollback keeps this.
        print(f"review-alloc: {note}", file=sys.stderr)
    return _run(None, note or None)
