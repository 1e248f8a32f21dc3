"""The smallest fixes: exact against OR-tools min-cost flow, brute force, and re-planning."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow

from review_alloc.model import Conflict, PairRule, Paper, Policy, Reviewer, ScoreTable, Session
from review_alloc.plan import find_gaps, make_plan
from review_alloc.plan.explain import coverage_network, shortfall_groups
from review_alloc.plan.fixes import pair_losses, raise_caps_fix, recruit_fix
from review_alloc.plan.whatif import add_recruits, apply_cap_fix, apply_recruit_fix
from tests.plan.test_explain_groups import NO_INFERENCE, topic_session
from tests.plan.test_planner import random_session, reference_instance

TOPICS = ("kelp ecology", "radar imaging", "lake ice")


def random_topic_session(seed: int, *, removed: float = 0.0) -> Session:
    """A seeded invented venue where only reviewers sharing a topic (and a few others) score.

    A share `removed` of the scored pairs become declared conflicts (two thirds) or blocks.
    """
    rng = np.random.default_rng(seed)
    n_r, n_p = int(rng.integers(3, 9)), int(rng.integers(4, 14))
    reviewers = [
        Reviewer(
            id=f"r{j}",
            topics=list(rng.choice(TOPICS, size=int(rng.integers(1, 3)), replace=False)),
            cap=int(rng.integers(1, 5)),
        )
        for j in range(n_r)
    ]
    papers = [
        Paper(
            id=f"p{i}", topics=list(rng.choice(TOPICS, size=int(rng.integers(1, 3)), replace=False))
        )
        for i in range(n_p)
    ]
    rows = [
        (j, i)
        for j in range(n_r)
        for i in range(n_p)
        if set(reviewers[j].topics) & set(papers[i].topics) or rng.random() < 0.1
    ]
    cut = [rows[k] for k in np.flatnonzero(rng.random(len(rows)) < removed)]
    conflicts = [Conflict(reviewer=f"r{j}", paper=f"p{i}") for j, i in cut[0::3] + cut[1::3]]
    blocks = [PairRule(reviewer=f"r{j}", paper=f"p{i}") for j, i in cut[2::3]]
    return Session(
        name=f"random topics {seed}",
        conflicts=conflicts,
        blocks=blocks,
        policy=Policy(
            reviews=3,
            min_reviews=2,
            cap=int(rng.integers(2, 5)),
            unscored="exclude",
            conflict_rules=NO_INFERENCE,
        ),
        papers=papers,
        reviewers=reviewers,
        scores=ScoreTable.from_arrays(
            np.array([j for j, _ in rows], dtype=np.int32),
            np.array([i for _, i in rows], dtype=np.int32),
            np.round(rng.uniform(0, 1, size=len(rows)), 2),
        ),
    )


def test_worked_case_raise_and_recruit() -> None:
    session = topic_session(
        {"quantum sensing": (8, 3, 4), "soil chemistry": (10, 8, 6)}, policy_cap=4
    )
    cov = coverage_network(session, "reviews")
    fix = raise_caps_fix(cov)
    # Each of the 8 papers needs all 3 eligible reviewers: 8 papers each, 4 above their cap.
    assert fix.total == 12
    assert [(r.reviewer, r.raise_by, r.new_cap) for r in fix.raises] == [
        ("QUA-R1", 4, 8),
        ("QUA-R2", 4, 8),
        ("QUA-R3", 4, 8),
    ]
    assert fix.demand == 24 + 30
    assert (fix.coverage_before, fix.coverage_after) == (fix.demand - 12, fix.demand)
    recruits = recruit_fix(cov)
    # 12 reviews at the policy cap of 4 each: three recruits.
    assert recruits.total == 3
    assert [(n.topic, n.recruits, n.reviews) for n in recruits.needs] == [
        ("quantum sensing", 3, 12)
    ]
    for changed in (apply_cap_fix(session, fix), apply_recruit_fix(session, recruits)):
        assert find_gaps(changed, make_plan(changed).plan) == []


def test_recruits_respect_one_review_per_paper_each() -> None:
    # 12 reviews missing and a cap of 12 would fit one recruit, but a recruit reviews a paper
    # once, and each paper misses one or two reviews: two recruits are the least.
    session = topic_session(
        {"quantum sensing": (8, 3, 4), "soil chemistry": (10, 8, 6)}, policy_cap=12
    )
    recruits = recruit_fix(coverage_network(session, "reviews"))
    assert recruits.total == 2
    one = add_recruits(session, {"quantum sensing": 1})
    assert find_gaps(one, make_plan(one).plan) != []


def test_a_paper_with_too_few_eligible_reviewers_needs_recruits() -> None:
    session = topic_session({"lake ice": (1, 2, 5), "soil chemistry": (4, 4, 6)})
    cov = coverage_network(session, "reviews")
    fix = raise_caps_fix(cov)
    assert fix.total == 0
    assert [(u.paper, u.missing) for u in fix.unclosable] == [("LAK-P1", 1)]
    recruits = recruit_fix(cov)
    assert (recruits.total, recruits.coverage_after) == (1, recruits.demand)
    changed = apply_recruit_fix(session, recruits)
    assert find_gaps(changed, make_plan(changed).plan) == []


def _ortools_least_raise(session: Session) -> tuple[int, int]:
    """(max coverage with unlimited raises, least total raise) by OR-tools min-cost flow."""
    inst = reference_instance(session)
    n_r, n_p = len(inst.cap), len(inst.reviews)
    s, t = n_r + n_p, n_r + n_p + 1
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    unlimited = int(inst.reviews.sum())
    for j in range(n_r):
        solver.add_arc_with_capacity_and_unit_cost(s, j, int(inst.cap[j]), 0)
        solver.add_arc_with_capacity_and_unit_cost(s, j, unlimited, 1)
    for j, i in inst.pairs:
        solver.add_arc_with_capacity_and_unit_cost(int(j), n_r + int(i), 1, 0)
    for i in range(n_p):
        solver.add_arc_with_capacity_and_unit_cost(n_r + i, t, int(inst.reviews[i]), 0)
    # Max flow with min cost sends as much as it can of the source's supply to the sink.
    solver.set_node_supply(s, unlimited)
    solver.set_node_supply(t, -unlimited)
    assert solver.solve_max_flow_with_min_cost() == solver.OPTIMAL
    return solver.maximum_flow(), solver.optimal_cost()


@pytest.mark.parametrize("seed", range(40))
def test_least_cap_raise_matches_ortools_and_closes_the_gaps(seed: int) -> None:
    session = random_session(900 + seed, unscored="exclude" if seed % 2 else "zero")
    cov = coverage_network(session, "reviews")
    fix = raise_caps_fix(cov)
    # Reference: OR-tools SimpleMinCostFlow, max flow at least cost, one cost unit per raise.
    best, least = _ortools_least_raise(session)
    assert (fix.coverage_after, fix.total) == (best, least)
    assert sum(r.raise_by for r in fix.raises) == fix.total
    changed = apply_cap_fix(session, fix)
    plan = make_plan(changed).plan
    assert plan.figures.coverage == fix.coverage_after
    still = {g.paper for g in find_gaps(changed, plan)}
    assert still == {u.paper for u in fix.unclosable}


@pytest.mark.parametrize("seed", range(10))
def test_least_cap_raise_with_pins_closes_what_it_says(seed: int) -> None:
    session = random_session(1000 + seed, unscored="exclude", pins=True)
    cov = coverage_network(session, "reviews")
    fix = raise_caps_fix(cov)
    changed = apply_cap_fix(session, fix)
    assert make_plan(changed).plan.figures.coverage == fix.coverage_after
    # One more unit of cap adds at most one review, so the total cannot be smaller.
    assert fix.total == fix.coverage_after - fix.coverage_before


@pytest.mark.parametrize("seed", range(25))
def test_fewest_recruits_close_the_gaps_and_no_fewer_do(seed: int) -> None:
    session = random_topic_session(1100 + seed)
    cov = coverage_network(session, "reviews")
    fix = recruit_fix(cov)
    assert fix.note == ""
    assert fix.coverage_after == fix.demand  # every paper has a topic
    changed = apply_recruit_fix(session, fix)
    assert find_gaps(changed, make_plan(changed).plan) == []
    if fix.total == 0:
        return
    # Brute force: every way to recruit one person fewer, over the groups' topics, falls short.
    topics = sorted({t for g in shortfall_groups(cov) for t in g.topics})
    for counts in itertools.product(range(fix.total), repeat=len(topics)):
        if sum(counts) != fix.total - 1:
            continue
        wanted = {t: n for t, n in zip(topics, counts, strict=True) if n}
        fewer = add_recruits(session, wanted) if wanted else session
        assert find_gaps(fewer, make_plan(fewer).plan) != []


@pytest.mark.parametrize("seed", range(20))
def test_conflict_and_block_losses_match_replanning(seed: int) -> None:
    session = random_topic_session(1200 + seed, removed=0.3)
    cov = coverage_network(session, "reviews")
    losses = pair_losses(cov)
    base = make_plan(session).plan.figures.coverage
    listed = set()
    for loss in losses:
        pairs = {(loss.reviewer, p) for p in loss.papers}
        listed |= pairs
        lifted = session.model_copy(
            update={
                "conflicts": [c for c in session.conflicts if (c.reviewer, c.paper) not in pairs],
                "blocks": [b for b in session.blocks if (b.reviewer, b.paper) not in pairs],
            }
        )
        assert loss.exact
        assert make_plan(lifted).plan.figures.coverage - base == loss.gain > 0
    # Brute force: any single conflict or block not listed adds nothing when lifted.
    for kind in ("conflicts", "blocks"):
        for row in getattr(session, kind):
            if (row.reviewer, row.paper) in listed:
                continue
            lifted = session.model_copy(
                update={kind: [x for x in getattr(session, kind) if x is not row]}
            )
            assert make_plan(lifted).plan.figures.coverage == base
