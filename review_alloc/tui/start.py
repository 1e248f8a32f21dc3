"""Where the app's sessions come from: the demo copy in the user's data folder, or a file."""

from __future__ import annotations

import os
from pathlib import Path

from review_alloc.model import save_session

DEMO_FILE = "demo-workshop.json"


def data_folder() -> Path:
    """The per-user data folder: `$XDG_DATA_HOME/review-alloc`, else `~/.local/share/...`."""
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "review-alloc"


def demo_session_path() -> Path:
    """The user's own copy of the demo workshop, written from the built-in sample if missing.

    The chair edits and saves this copy; the sample shipped with the program never changes.
    """
    path = data_folder() / DEMO_FILE
    if not path.exists():
        from review_alloc.samples import workshop

        path.parent.mkdir(parents=True, exist_ok=True)
        save_session(workshop(), path)
    return path
