"""The open session's file: open, save, import from CSV, export, and the user's demo copy."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Literal, Self

from review_alloc.model import InputError, Policy, load_session, save_session
from review_alloc.workspace.base import WorkspaceBase

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


class FilesMixin(WorkspaceBase):
    """Reading and writing the session file, importing and exporting, for a Workspace."""

    @classmethod
    def open(cls, path: Path) -> Self:
        """Load a session file (InputError with file and field on bad input)."""
        return cls(load_session(path), path)

    @classmethod
    def open_demo(cls) -> Self:
        """The user's own copy of the demo workshop (created from the built-in sample once)."""
        return cls.open(demo_session_path())

    @classmethod
    def demo(cls) -> Self:
        """The built-in demo workshop in memory, with no file."""
        from review_alloc.samples import workshop

        return cls(workshop(), None)

    @classmethod
    def import_csv(
        cls,
        target: Path,
        papers: Path,
        reviewers: Path,
        conflicts: Path | None = None,
        scores: Path | None = None,
        *,
        policy: Policy | None = None,
        ignore_extra: bool = False,
        name: str | None = None,
        kind: str = "conference",
        replace: bool = False,
    ) -> Self:
        """Build a session from CSV files and save it to `target` (refused if it exists unless
        `replace`); every problem names its file, line and column, and nothing is written."""
        from review_alloc.io import import_csv

        if target.exists() and not replace:
            raise InputError([f"{target}: already exists; choose another file name"])
        session = import_csv(
            papers,
            reviewers,
            conflicts,
            scores,
            policy=policy,
            ignore_extra=ignore_extra,
            name=name or target.stem,
            kind=kind,
        )
        workspace = cls(session, None)
        workspace.save(target)
        return workspace

    def save(self, path: Path | None = None) -> Path:
        """Write the session atomically to `path` (or where it came from) and clear the mark."""
        target = path or self.path
        if target is None:
            raise InputError(["this session has no file yet; choose where to save it"])
        save_session(self.session, target)
        self.path = target
        self.dirty = False
        return target

    def export(self, target: Path, by: Literal["paper", "reviewer"] = "paper") -> int:
        """Write the current plan as CSV, one row per assignment; returns the rows written."""
        from review_alloc.io import export_plan_csv

        return export_plan_csv(self.session, target, by=by)

