"""Papers, reviewers, declared conflicts, and the pair rules used for pins and blocks.

Lists of papers and reviewers are append-only in practice: the score table refers to them by
position, so an entity that leaves the process is flagged `withdrawn`, never deleted. Each
entity is frozen (assigning a field raises): a change makes a new object with `model_copy`, so
code that finds the very same object in two sessions may take it as unchanged.
"""

from __future__ import annotations

from pydantic import ConfigDict, Field

from review_alloc.model.base import (
    DocumentModel,
    Email,
    EmailList,
    Identifier,
    MatchedText,
    Text,
    TextList,
)
from review_alloc.model.limits import MAX_COUNT
from review_alloc.model.signals import LongText


class Paper(DocumentModel):
    """A submission (a "proposal" in a panel) with its own review targets and author details."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    id: Identifier
    title: Text = ""
    topics: TextList = Field(default_factory=list)
    reviews: int | None = Field(default=None, ge=1, le=MAX_COUNT)
    """Reviews wanted; `None` means the policy's."""
    min_reviews: int | None = Field(default=None, ge=0, le=MAX_COUNT)
    """Reviews required; `None` means the policy's, clamped to this paper's `reviews`."""
    authors: EmailList = Field(default_factory=list)
    """Authors' e-mail addresses, lower-cased; used to infer conflicts."""
    institutions: TextList = Field(default_factory=list)
    senior_min: int | None = Field(default=None, ge=0, le=MAX_COUNT)
    """Senior reviewers wanted; `None` means the policy's, clamped to this paper's reviews."""
    withdrawn: bool = False
    abstract: LongText = ""
    """The paper's abstract, read by the text part of the score recipe."""
    keywords: TextList = Field(default_factory=list)
    """Free keywords; the recipe's text and topic parts read them beside the topics."""


class Reviewer(DocumentModel):
    """A person who reviews, with an optional load cap and floor of their own."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    id: Identifier
    name: Text = ""
    email: Email = ""
    institution: MatchedText = ""
    topics: TextList = Field(default_factory=list)
    cap: int | None = Field(default=None, ge=0, le=MAX_COUNT)
    """Most papers; `None` means the policy's."""
    floor: int | None = Field(default=None, ge=0, le=MAX_COUNT)
    """Fewest papers; `None` means the policy's, clamped to this reviewer's cap."""
    overload: int | None = Field(default=None, ge=0, le=MAX_COUNT)
    """Papers above cap this reviewer accepts when coverage needs them; `None`: the policy's
    `overload_allowance`."""
    senior: bool = False
    withdrawn: bool = False
    profile: LongText = ""
    """Free text about the reviewer's work (keywords, titles and abstracts of their papers),
    read by the text part of the score recipe."""
    keywords: TextList = Field(default_factory=list)
    """Free keywords; the recipe's text and topic parts read them beside the topics."""


class Conflict(DocumentModel):
    """A declared conflict of interest; inferred ones are computed from the policy's rules."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    reviewer: Identifier
    paper: Identifier
    reason: Text = "declared"


class PairRule(DocumentModel):
    """A (reviewer, paper) pair a chair fixed: a pin (must be assigned) or a block (must not)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    reviewer: Identifier
    paper: Identifier
    reason: Text = ""
