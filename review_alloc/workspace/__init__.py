"""The Workspace: the one door to an open session for the command line and the terminal app.

It owns the session and its file (open, import, save, export), every change (validated,
refused with reasons from the planner's rule module, recorded as one event each), the history
(revisions, undo, diff, notices), and the services both faces call: plan (warm whenever there
is a previous outcome), explain, preview a fix or a what-if, and accept it as one change.
The faces format and display; they never save, solve or decide a rule around it.
"""

from review_alloc.workspace.base import ChangeRefused
from review_alloc.workspace.files import (
    FileChanged,
    FilesMixin,
    data_folder,
    demo_session_path,
    files_written,
    session_lock,
)
from review_alloc.workspace.history import HistoryEntry
from review_alloc.workspace.planning import ChangeSet, PlanningMixin, PlanRequest, prepare_solver
from review_alloc.workspace.scoring import ScoringMixin


class Workspace(FilesMixin, PlanningMixin, ScoringMixin):
    """An open session with its file path, its unsaved-changes mark, its changes and services."""


__all__ = [
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
    "session_lock",
]
