"""Leads settled before the flow (`leads.settled_leads`) and warm lead choices, against
scipy's linear_sum_assignment on the dense slot matrix (the planner's own dense path)."""

from __future__ import annotations

import numpy as np
import pytest

import review_alloc.plan.leads as leads
from review_alloc.model import Paper, Plan, Policy, Reviewer, Session
from review_alloc.plan import check_plan
from review_alloc.plan.figures import assignment_indices
from review_alloc.plan.leads import pick_leads, with_leads
from review_alloc.plan.weights import SCORE_RESOLUTION
from tests.plan.test_constraints_leads import plan_of, value, with_scores


def _mixed_load_case(seed: int, n_r: int = 120, n_p: int = 150) -> tuple[Session, Plan]:
    """Reviewers with few and with many reviews (some under the lead cap, some over it), ties
    in score, and some seniors: both the settled rounds and the flow have work to do."""
    rng = np.random.default_rng(seed)
    reviewers = [Reviewer(id=f"r{j}", senior=bool(rng.random() < 0.3)) for j in range(n_r)]
    papers = [Paper(id=f"p{i}") for i in range(n_p)]
    session = Session(
        name=f"settled leads {seed}", policy=Policy(max_leads=int(rng.integers(1, 4)), cap=40),
        papers=papers, reviewers=reviewers,
    )
    # A few busy reviewers take many papers; the rest take one or two.
    weight = np.where(np.arange(n_r) < n_r // 8, 12.0, 1.0)
    weight /= weight.sum()
    pairs = [
        (f"r{j}", f"p{i}", float(rng.choice([0.25, 0.5, 0.75, 1.0])))
        for i in range(n_p)
        for j in rng.choice(n_r, size=int(rng.integers(1, 4)), replace=False, p=weight)
    ]
    session = with_scores(session, pairs)
    return session, plan_of(session, pairs)


def _settled(session: Session, plan: Plan) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    senior = session.reviewer_senior_array()[reviewer]
    steps = np.rint(score * SCORE_RESOLUTION).astype(np.int64)
    return leads.settled_leads(
        reviewer, paper, senior, steps, session.policy.max_leads, len(session.reviewers)
    )


@pytest.mark.parametrize("seed", range(8))
def test_settled_leads_then_flow_match_dense(seed: int, monkeypatch: pytest.MonkeyPatch) -> None:
    session, plan = _mixed_load_case(seed)
    fixed, core, left = _settled(session, plan)
    # Both parts have work to do, so both are checked below.
    assert len(fixed) > 0 and len(core) > 0
    assert (left >= 0).all()
    monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
    sparse = value(session, plan, pick_leads(session, plan).lead_of)
    monkeypatch.undo()
    # Reference: scipy's linear_sum_assignment on the dense slot matrix.
    dense = value(session, plan, pick_leads(session, plan).lead_of)
    assert sparse[:2] == dense[:2]
    assert sparse[2] == pytest.approx(dense[2], abs=1e-9)


def test_settled_leads_follow_freed_reviewers_round_by_round() -> None:
    # r0 leads at most one paper and reviews p0 and p1, so it is held back at first; r1 (one
    # review, its best pair for p1) settles p1, which leaves r0 with p0 alone, now settled.
    session = Session(
        name="rounds", policy=Policy(max_leads=1, cap=5),
        papers=[Paper(id="p0"), Paper(id="p1")],
        reviewers=[Reviewer(id="r0"), Reviewer(id="r1")],
    )
    rows = [("r0", "p0", 0.9), ("r0", "p1", 0.5), ("r1", "p1", 0.8)]
    session = with_scores(session, rows)
    plan = plan_of(session, rows)
    fixed, core, left = _settled(session, plan)
    assert sorted(fixed.tolist()) == [0, 2] and len(core) == 0
    assert left.tolist() == [0, 0]


def test_a_paper_whose_best_reviewer_is_held_back_stays_open() -> None:
    # r0 may lead one paper and is the best of both: neither is settled, the flow decides.
    session = Session(
        name="held", policy=Policy(max_leads=1, cap=5),
        papers=[Paper(id="p0"), Paper(id="p1")],
        reviewers=[Reviewer(id="r0"), Reviewer(id="r1"), Reviewer(id="r2")],
    )
    rows = [("r0", "p0", 0.9), ("r1", "p0", 0.2), ("r0", "p1", 0.9), ("r2", "p1", 0.7)]
    session = with_scores(session, rows)
    plan = plan_of(session, rows)
    fixed, core, _ = _settled(session, plan)
    assert len(fixed) == 0 and len(core) == 4


@pytest.mark.parametrize("seed", range(6))
def test_warm_choices_over_random_replans_match_a_cold_choice(
    seed: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Re-plans move one or a handful of reviews; each choice restarts from the last state
    # (where few pairs are new to it) and must equal a cold choice in every tier.
    rng = np.random.default_rng(100 + seed)
    session, plan = _mixed_load_case(seed)
    monkeypatch.setattr(leads, "WARM_NEW_SHARE", 0.2)
    warm_used: list[bool] = []
    original = leads._warm_leads

    def spy(*args: object) -> object:
        warm_used.append(True)
        return original(*args)  # type: ignore[arg-type]

    monkeypatch.setattr(leads, "_warm_leads", spy)
    state = None
    for _ in range(5):
        rows = [(a.reviewer, a.paper, a.score) for a in plan.assignments]
        taken = {(r, p) for r, p, _ in rows}
        for k in rng.choice(len(rows), size=int(rng.integers(1, 6)), replace=False).tolist():
            paper = rows[k][1]
            while (reviewer := f"r{int(rng.integers(len(session.reviewers)))}", paper) in taken:
                pass
            taken.add((reviewer, paper))
            rows[k] = (reviewer, paper, float(rng.choice([0.25, 0.5, 0.75, 1.0])))
        session = with_scores(session, rows)
        plan = plan_of(session, rows)
        monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
        reviewer, paper, score = assignment_indices(session, plan.assignments)
        mask, state = leads.lead_mask_warm(session, reviewer, paper, score, state)
        lead_of = leads.lead_choice(session, reviewer, paper, mask).lead_of
        warm = value(session, plan, lead_of)
        cold = value(session, plan, pick_leads(session, plan).lead_of)
        monkeypatch.setattr(leads, "DENSE_LIMIT", 4_000_000)
        # Reference: scipy's linear_sum_assignment on the dense slot matrix, from scratch.
        dense = value(session, plan, pick_leads(session, plan).lead_of)
        assert warm[:2] == cold[:2] == dense[:2]
        assert warm[2] == pytest.approx(dense[2], abs=1e-9)
        assert cold[2] == pytest.approx(dense[2], abs=1e-9)
        check_plan(session, with_leads(plan, leads.LeadChoice(lead_of, (), ())), None)
    assert warm_used


@pytest.mark.parametrize("seed", range(4))
def test_a_cold_choice_on_the_core_alone_keeps_a_state_on_every_node(
    seed: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The cold flow runs on the reviewers and papers of the open pairs only; its state is laid
    # out on every reviewer and paper, and a restart from it on the same pairs keeps every tier.
    session, plan = _mixed_load_case(seed)
    monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    mask, state = leads.lead_mask_warm(session, reviewer, paper, score)
    assert state is not None
    assert len(state.potentials) == 4 + len(session.reviewers) + len(session.papers)
    assert len(state.senior) == len(state.slots) == len(session.reviewers)
    again, _ = leads.lead_mask_warm(session, reviewer, paper, score, state)
    first = value(session, plan, leads.lead_choice(session, reviewer, paper, mask).lead_of)
    second = value(session, plan, leads.lead_choice(session, reviewer, paper, again).lead_of)
    monkeypatch.setattr(leads, "DENSE_LIMIT", 4_000_000)
    # Reference: scipy's linear_sum_assignment on the dense slot matrix.
    dense = value(session, plan, pick_leads(session, plan).lead_of)
    assert first[:2] == second[:2] == dense[:2]
    assert first[2] == pytest.approx(dense[2], abs=1e-9)
    assert second[2] == pytest.approx(dense[2], abs=1e-9)


def test_the_best_first_order_is_lexsorts_order() -> None:
    # One stable sort of a combined key, or numpy's lexsort where the key would not fit int64.
    rng = np.random.default_rng(12)
    for top in (3, 10_000, 2**60):
        for _ in range(20):
            n = int(rng.integers(0, 200))
            paper = np.sort(rng.integers(0, 30, n))
            senior = rng.random(n) < 0.4
            score = rng.integers(0, top, n, dtype=np.int64)
            expected = np.lexsort((-score, ~senior, paper))
            assert np.array_equal(leads._best_first(paper, senior, score), expected)
            shuffled = rng.permutation(n)
            assert np.array_equal(
                leads._best_first(paper[shuffled], senior[shuffled], score[shuffled]),
                np.lexsort((-score[shuffled], ~senior[shuffled], paper[shuffled])),
            )


def test_dense_ranks_are_numpys_unique_with_inverse() -> None:
    rng = np.random.default_rng(5)
    for size in (1, 7, 300):
        index = rng.integers(0, size, int(rng.integers(1, 200)))
        # Reference: numpy's own np.unique(return_inverse=True).
        values, inverse = np.unique(index, return_inverse=True)
        got_values, got_inverse = leads._dense_ranks(index, size + 3)
        assert np.array_equal(got_values, values)
        assert np.array_equal(got_inverse, inverse)
