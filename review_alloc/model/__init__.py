"""The session document: pydantic models, the score table, the file format and atomic saves.

Nothing here plans, prints, or imports the UI. The public names load with the module that
holds them, on first use (PEP 562): `from review_alloc.model import InputError` loads no
pydantic model and no numpy, so the command line's help and usage errors start fast.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from review_alloc._lazy import lazy_names

if TYPE_CHECKING:
    from review_alloc.model.entities import Conflict, PairRule, Paper, Reviewer
    from review_alloc.model.errors import (
        MAX_LINES_PER_FILE,
        InputError,
        capped_lines,
        validation_error_lines,
    )
    from review_alloc.model.events import Action, Event
    from review_alloc.model.history import HistoryError
    from review_alloc.model.limits import MAX_COUNT, MAX_SCORE
    from review_alloc.model.parts import PART_NAMES
    from review_alloc.model.plans import Assignment, Plan, PlanFigures
    from review_alloc.model.policy import DEFAULT_PUBLIC_MAIL_DOMAINS, ConflictRules, Policy
    from review_alloc.model.scores import ENCODING as SCORE_ENCODING
    from review_alloc.model.scores import ScoreTable
    from review_alloc.model.session import FORMAT_VERSION, Session
    from review_alloc.model.signals import (
        BID_LEVELS,
        MAX_BID,
        MAX_TEXT_CHARS,
        ScoreRecipe,
        Signals,
        bid_part,
    )
    from review_alloc.model.storage import (
        atomic_write_bytes,
        atomic_write_text,
        load_session,
        remove_leftovers,
        save_session,
        session_bytes,
        session_json_schema,
    )
    from review_alloc.model.text import free_text, matched_text, matched_text_problem

_HOMES: dict[str, tuple[str, ...]] = {
    "entities": ("Conflict", "PairRule", "Paper", "Reviewer"),
    "errors": ("MAX_LINES_PER_FILE", "InputError", "capped_lines", "validation_error_lines"),
    "events": ("Action", "Event"),
    "history": ("HistoryError",),
    "limits": ("MAX_COUNT", "MAX_SCORE"),
    "parts": ("PART_NAMES",),
    "plans": ("Assignment", "Plan", "PlanFigures"),
    "policy": ("DEFAULT_PUBLIC_MAIL_DOMAINS", "ConflictRules", "Policy"),
    "scores": ("ScoreTable",),
    "session": ("FORMAT_VERSION", "Session"),
    "signals": ("BID_LEVELS", "MAX_BID", "MAX_TEXT_CHARS", "ScoreRecipe", "Signals", "bid_part"),
    "storage": (
        "atomic_write_bytes",
        "atomic_write_text",
        "load_session",
        "remove_leftovers",
        "save_session",
        "session_bytes",
        "session_json_schema",
    ),
    "text": ("free_text", "matched_text", "matched_text_problem"),
}
_RENAMED = {"SCORE_ENCODING": ("scores", "ENCODING")}
_WHERE: dict[str, tuple[str, str]] = {
    **{name: (module, name) for module, names in _HOMES.items() for name in names},
    **_RENAMED,
}


__getattr__, __dir__ = lazy_names(__name__, _WHERE, globals(), _WHERE)


__all__ = [
    "BID_LEVELS",
    "MAX_BID",
    "MAX_TEXT_CHARS",
    "PART_NAMES",
    "ScoreRecipe",
    "Signals",
    "bid_part",
    "DEFAULT_PUBLIC_MAIL_DOMAINS",
    "FORMAT_VERSION",
    "MAX_COUNT",
    "MAX_LINES_PER_FILE",
    "MAX_SCORE",
    "SCORE_ENCODING",
    "Action",
    "Assignment",
    "Conflict",
    "ConflictRules",
    "Event",
    "HistoryError",
    "InputError",
    "PairRule",
    "Paper",
    "Plan",
    "PlanFigures",
    "Policy",
    "Reviewer",
    "ScoreTable",
    "Session",
    "atomic_write_bytes",
    "atomic_write_text",
    "capped_lines",
    "free_text",
    "load_session",
    "matched_text",
    "matched_text_problem",
    "remove_leftovers",
    "save_session",
    "session_bytes",
    "session_json_schema",
    "validation_error_lines",
]
