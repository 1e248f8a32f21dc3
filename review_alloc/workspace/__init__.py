"""The Workspace: the one door to an open session for the command line and the terminal app.

It owns the session and its file (open, import, save, export), every change (validated,
refused with reasons from the planner's rule module, recorded as one event each), the history
(revisions, undo, diff, notices), and the services both faces call: plan (warm whenever there
is a previous outcome), explain, preview a fix or a what-if, and accept it as one change.
The faces format and display; they never save, solve or decide a rule around it.
"""

from typing import Any

from review_alloc.workspace.base import ChangeRefused
from review_alloc.workspace.files import (
    FileChanged,
    FilesMixin,
    data_folder,
    demo_session_path,
    files_written,
    refresh_demo,
    session_lock,
)
from review_alloc.workspace.history import HistoryEntry
from review_alloc.workspace.planning import (
    ChangeSet,
    PlanningMixin,
    PlanRequest,
    prepare_solver,
    ready_for_replan,
)
from review_alloc.workspace.recruits import RecruitsMixin
from review_alloc.workspace.scoring import ScoringMixin


class Workspace(FilesMixin, PlanningMixin, RecruitsMixin, ScoringMixin):
    """An open session with its file path, its unsaved-changes mark, its changes and services."""


_FROM_FIXES = ("FIX_KEYS", "FixMenu", "TargetFix")


def __getattr__(name: str) -> Any:
    """The fix types, loaded on first use: the fixes need scipy, and a command that only
    reads a session must start without it."""
    if name in _FROM_FIXES:
        from review_alloc.plan import fixes

        return getattr(fixes, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = [
    "FIX_KEYS",
    "FixMenu",
    "TargetFix",
    "ChangeRefused",
    "ChangeSet",
    "FileChanged",
    "HistoryEntry",
    "PlanRequest",
    "Workspace",
    "data_folder",
    "demo_session_path",
    "files_written",
    "prepare_solver",
    "ready_for_replan",
    "refresh_demo",
    "session_lock",
]
