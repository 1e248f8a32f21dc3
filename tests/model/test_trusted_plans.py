"""Trusted plan construction against pydantic's validating constructors as the reference."""

from __future__ import annotations

import gc
from datetime import UTC, datetime, timedelta, timezone

import numpy as np
import pytest
from pydantic import ValidationError

from review_alloc.model import Assignment, Plan, PlanFigures
from review_alloc.model.plans import trusted_assignments, trusted_plan


def _columns(seed: int) -> tuple[list[str], list[str], list[float], list[bool]]:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 60))
    papers = [f"p{int(i)}" for i in rng.integers(0, 30, n)]
    reviewers = [f"r{k}" for k in range(n)]
    scores = np.round(rng.uniform(0, 1, n), 3).tolist()
    leads = (rng.random(n) < 0.3).tolist()
    return papers, reviewers, scores, leads


@pytest.mark.parametrize("seed", range(8))
def test_trusted_assignments_equal_validated_ones(seed: int) -> None:
    columns = _columns(seed)
    trusted = trusted_assignments(*columns)
    # Reference: pydantic's validating constructor on the same rows.
    validated = [
        Assignment(paper=p, reviewer=r, score=s, lead=k)
        for p, r, s, k in zip(*columns, strict=True)
    ]
    assert trusted == validated
    assert [a.model_dump_json() for a in trusted] == [a.model_dump_json() for a in validated]
    assert [a.model_fields_set for a in trusted] == [a.model_fields_set for a in validated]
    changed = trusted[0].model_copy(update={"lead": not trusted[0].lead})
    assert changed.lead != trusted[0].lead and changed.paper == trusted[0].paper
    assert gc.isenabled()


def test_trusted_plan_round_trips_like_a_validated_plan() -> None:
    papers, reviewers, scores, _ = _columns(3)
    leads = [False] * len(papers)
    assignments = trusted_assignments(papers, reviewers, scores, leads)
    figures = PlanFigures(
        required_coverage=0,
        required_demand=0,
        coverage=0,
        demand=len(papers),
        floors_met=0,
        floors_demand=0,
        total_score=round(sum(scores), 6),
        assigned=len(papers),
    )
    made = datetime(2027, 3, 1, 9, 30, tzinfo=timezone(timedelta(hours=2)))
    plan = trusted_plan(assignments, figures, made, "test")
    # Reference: pydantic validation of the same fields, and of the plan's own JSON.
    reference = Plan(
        assignments=assignments, figures=figures, created_at=made, checked=False, method="test"
    )
    assert plan == reference
    assert plan.created_at.tzinfo == UTC
    assert Plan.model_validate_json(plan.model_dump_json()) == reference


def test_trusted_plan_still_refuses_a_naive_time() -> None:
    figures = PlanFigures(
        required_coverage=0,
        required_demand=0,
        coverage=0,
        demand=0,
        floors_met=0,
        floors_demand=0,
        total_score=0.0,
        assigned=0,
    )
    # Reference: the validating constructor refuses a naive timestamp the same way.
    with pytest.raises(ValidationError, match="time zone"):
        trusted_plan([], figures, datetime(2027, 3, 1, 9, 30), "test")
