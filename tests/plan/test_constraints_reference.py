"""Seniors, institutions, eligibility rules and load balance against HiGHS integer programs."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.model import (
    Conflict,
    ConflictRules,
    PairRule,
    Paper,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)
from review_alloc.plan import make_plan
from review_alloc.plan.errors import PlanInputError
from tests.plan.constraint_reference import TIERS, lexicographic_rules_optimum, rule_instance

NO_INFERENCE = ConflictRules(author_email=False, institution=False, email_domain=False)
TOPICS = ["alpha", "beta", "gamma", "delta"]
LABS = ["Lab Oster", "Lab Wrenmoor", "Lab Calvale"]


def rules_session(
    seed: int, size: tuple[int, int] | None = None, **policy: object
) -> Session:
    """A seeded random session with seniors, institutions, topics, conflicts, blocks and pins
    (`size` = (reviewers, papers), else a small random size)."""
    rng = np.random.default_rng(seed)
    n_r, n_p = int(rng.integers(3, 9)), int(rng.integers(2, 9))
    if size is not None:
        n_r, n_p = size
    reviewers = [
        Reviewer(
            id=f"r{j}",
            institution=LABS[int(rng.integers(len(LABS)))] if rng.random() < 0.85 else "",
            topics=list(rng.choice(TOPICS, size=int(rng.integers(1, 3)), replace=False)),
            senior=bool(rng.random() < 0.4),
            cap=int(rng.integers(1, 5)),
            floor=int(rng.integers(0, 2)) if rng.random() < 0.3 else None,
        )
        for j in range(n_r)
    ]
    for r in reviewers:
        if r.floor is not None and r.floor > r.cap:
            r.floor = r.cap
    papers = [
        Paper(
            id=f"p{i}",
            topics=list(rng.choice(TOPICS, size=int(rng.integers(1, 3)), replace=False)),
            senior_min=int(rng.integers(0, 3)) if rng.random() < 0.3 else None,
        )
        for i in range(n_p)
    ]
    all_pairs = [(j, i) for j in range(n_r) for i in range(n_p)]
    rng.shuffle(all_pairs)
    k = len(all_pairs)
    scored = all_pairs[: int(k * 0.8)]
    conflicted = all_pairs[int(k * 0.8) : int(k * 0.88)]
    blocked = all_pairs[int(k * 0.88) : int(k * 0.92)]
    values = np.round(rng.uniform(0, 1, size=len(scored)), 2)
    base = Policy(reviews=3, min_reviews=1, cap=3, unscored="exclude", conflict_rules=NO_INFERENCE)
    return Session(
        name=f"rules {seed}",
        policy=base.model_copy(update=policy),
        papers=papers,
        reviewers=reviewers,
        conflicts=[Conflict(reviewer=f"r{j}", paper=f"p{i}") for j, i in conflicted],
        blocks=[PairRule(reviewer=f"r{j}", paper=f"p{i}") for j, i in blocked],
        scores=ScoreTable.from_arrays(
            np.array([j for j, _ in scored], dtype=np.int32),
            np.array([i for _, i in scored], dtype=np.int32),
            values,
        ),
    )


def assert_matches_highs(session: Session) -> None:
    """The planner's tiers equal the HiGHS integer-program optimum, tier by tier."""
    # Reference: HiGHS via scipy.optimize.milp, one tier after another (constraint_reference).
    ref = lexicographic_rules_optimum(rule_instance(session))
    if ref is None:
        with pytest.raises(PlanInputError, match="senior"):
            make_plan(session)
        return
    outcome = make_plan(session)
    assert outcome.plan.checked
    assert outcome.plan.bound is None, "small cases must be proven optimal"
    for name in TIERS:
        assert outcome.tiers[name] == pytest.approx(ref[name], abs=1e-6), name


@pytest.mark.parametrize("seed", range(25))
def test_senior_tier_matches_highs(seed: int) -> None:
    assert_matches_highs(rules_session(seed, senior_min=1))


@pytest.mark.parametrize("seed", range(15))
def test_hard_seniors_match_highs_or_are_refused(seed: int) -> None:
    assert_matches_highs(rules_session(300 + seed, senior_min=1, senior_hard=True))


@pytest.mark.parametrize("seed", range(25))
def test_institution_limit_matches_highs(seed: int) -> None:
    assert_matches_highs(rules_session(100 + seed, max_per_institution=1))


@pytest.mark.parametrize("seed", range(25))
def test_seniors_and_institutions_together_match_highs(seed: int) -> None:
    # Here the two rules cross and no flow model exists: the planner's split search must still
    # reach the integer optimum on cases this small.
    assert_matches_highs(rules_session(200 + seed, senior_min=1, max_per_institution=1))


def crossing_case(seed: int) -> None:
    session = rules_session(700 + seed, (19, 46), senior_min=1, max_per_institution=1)
    session = session.model_copy(
        update={"policy": session.policy.model_copy(update={"cap": 8})}
    )
    assert_matches_highs(session)


@pytest.mark.parametrize("seed", range(3))
def test_crossing_rules_at_46_papers_match_highs(seed: int) -> None:
    # The size where the budgeted split search used to stop short of the optimum (issue 21).
    crossing_case(seed)


@pytest.mark.large
@pytest.mark.parametrize("seed", range(3, 25))
def test_crossing_rules_at_46_papers_match_highs_more_seeds(seed: int) -> None:
    crossing_case(seed)


@pytest.mark.parametrize("seed", range(20))
def test_eligibility_rules_match_highs(seed: int) -> None:
    session = rules_session(400 + seed, min_score=0.3, require_shared_topic=seed % 2 == 0)
    assert_matches_highs(session)


@pytest.mark.parametrize("seed", range(20))
@pytest.mark.parametrize("balance", [0.05, 0.5])
def test_balance_matches_highs(seed: int, balance: float) -> None:
    assert_matches_highs(rules_session(500 + seed, balance=balance, senior_min=seed % 2))


def test_balance_narrows_the_load_spread_and_reports_before_and_after() -> None:
    from review_alloc.plan import plan_summary
    from review_alloc.samples import workshop

    session = workshop()
    plain = make_plan(session).plan
    balanced_session = session.model_copy(
        update={"policy": session.policy.model_copy(update={"balance": 0.2})}
    )
    balanced = make_plan(balanced_session).plan
    load = plan_summary(balanced_session, balanced)["load"]
    assert load["before"]["spread"] == plan_summary(session, plain)["load"]["spread"]
    assert load["spread"] < load["before"]["spread"]
    assert sum(load["histogram"]) == len(session.reviewers)
