"""Recorded changes to a session: what was done, to whom, when, and why."""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Literal

from pydantic import Field, field_validator

from review_alloc.model.base import DocumentModel, Text

Action = Literal[
    "withdraw-reviewer",
    "reinstate-reviewer",
    "withdraw-paper",
    "reinstate-paper",
    "add-reviewer",
    "add-paper",
    "set-reviewer",
    "set-paper",
    "declare-conflict",
    "pin",
    "unpin",
    "block",
    "unblock",
    "plan",
    "undo",
    "redo",
    "accept-fix",
    "accept-whatif",
    "set-policy",
    "rescore",
]


def _now() -> datetime:
    return datetime.now(UTC)


class Event(DocumentModel):
    """One change a chair made; `subject` names the reviewer, paper or pair it touched."""

    at: datetime = Field(default_factory=_now)
    action: Action
    subject: Text = ""
    detail: Text = ""
    reason: Text = ""

    @field_validator("at")
    @classmethod
    def _aware(cls, value: datetime) -> datetime:
        if value.tzinfo is None:
            raise ValueError("the time must carry a time zone")
        return value.astimezone(UTC)

    def describe(self) -> str:
        """One line for history views and diffs."""
        text = f"{self.action} {self.subject}".strip()
        if self.detail:
            text += f" ({self.detail})"
        if self.reason:
            text += f": {self.reason}"
        return text
