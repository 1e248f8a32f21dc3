"""Entities and the policy are values: assigning a field raises, a change is a new object.

The planner's patch and the checker take the very same object in two sessions as unchanged
(`plan.patch.session_change`, `plan.checker`), which is sound only if nobody changes one in
place.
"""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from review_alloc.model import Conflict, PairRule, Paper, Policy, Reviewer, ScoreRecipe
from review_alloc.model.policy import ConflictRules


@pytest.mark.parametrize(
    ("value", "field", "new"),
    [
        (Paper(id="P1"), "withdrawn", True),
        (Reviewer(id="R1"), "cap", 9),
        (Conflict(reviewer="R1", paper="P1"), "reason", "co-author"),
        (PairRule(reviewer="R1", paper="P1"), "reason", "asked"),
        (Policy(), "cap", 9),
        (ConflictRules(), "author_email", False),
        (ScoreRecipe(), "bid", 2.0),
    ],
)
def test_a_field_cannot_be_changed_in_place(value: object, field: str, new: object) -> None:
    with pytest.raises(ValidationError, match="frozen"):
        setattr(value, field, new)
    changed = value.model_copy(update={field: new})  # type: ignore[attr-defined]
    assert getattr(changed, field) == new and changed is not value
