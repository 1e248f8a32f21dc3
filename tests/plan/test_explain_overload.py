"""Allowed overloads: used only to cover reviews, reported, checked, and exact against OR-tools."""

from __future__ import annotations

import numpy as np
import pytest
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow

from review_alloc.model import Assignment, Policy, Session
from review_alloc.plan import PlanCheckError, check_plan, load_issues, make_plan
from review_alloc.plan.explain import coverage_network, shortfall_groups
from review_alloc.plan.figures import plan_figures
from review_alloc.plan.overload import overload_allowances
from tests.plan.test_explain_groups import topic_session
from tests.plan.test_planner import random_session, reference_instance


def with_allowance(session: Session, allowance: int) -> Session:
    """The session with a policy-wide overload allowance."""
    policy = session.policy.model_copy(update={"overload_allowance": allowance})
    return session.model_copy(update={"policy": policy})


def test_old_policies_load_with_no_overload() -> None:
    assert Policy().overload_allowance == 0
    assert Policy.model_validate({"reviews": 3}).overload_allowance == 0
    with pytest.raises(ValueError, match="overload_allowance"):
        Policy(overload_allowance=-1)


def test_overload_covers_the_gap_and_is_reported() -> None:
    session = with_allowance(topic_session({"quantum sensing": (8, 3, 4)}), 2)
    plan = make_plan(session).plan
    assert plan.figures.coverage == 18  # 12 within caps, 6 above
    over, under = load_issues(session, plan)
    assert [(x.reviewer, x.load, x.cap, x.excess) for x in over] == [
        ("QUA-R1", 6, 4, 2),
        ("QUA-R2", 6, 4, 2),
        ("QUA-R3", 6, 4, 2),
    ]
    assert under == []
    groups = shortfall_groups(coverage_network(session, "reviews"))
    assert [(g.needed, g.available, g.shortfall) for g in groups] == [(24, 18, 6)]


def test_overload_is_never_used_for_score_alone() -> None:
    # Plenty of capacity: nobody goes above cap even though an allowance is offered.
    session = with_allowance(topic_session({"quantum sensing": (4, 5, 4)}), 3)
    plan = make_plan(session).plan
    assert plan.figures.coverage == plan.figures.demand
    assert load_issues(session, plan)[0] == []


def test_per_reviewer_overload_overrides_the_policy() -> None:
    session = with_allowance(topic_session({"quantum sensing": (8, 3, 4)}), 2)
    reviewers = [
        session.reviewers[0].model_copy(update={"overload": 0}),
        session.reviewers[1].model_copy(update={"overload": 5}),
        *session.reviewers[2:],
    ]
    session = session.model_copy(update={"reviewers": reviewers})
    assert overload_allowances(session).tolist() == [0, 5, 2]
    plan = make_plan(session).plan
    over, _ = load_issues(session, plan)
    assert {x.reviewer: x.excess for x in over} == {"QUA-R2": 4, "QUA-R3": 2}
    assert plan.figures.coverage == 18


def test_checker_refuses_loads_beyond_the_allowance() -> None:
    session = with_allowance(topic_session({"quantum sensing": (8, 3, 4)}), 1)
    plan = make_plan(session).plan
    extra = [a for a in plan.assignments]
    taken = {(a.reviewer, a.paper) for a in extra}
    for paper in (p.id for p in session.papers):
        if ("QUA-R1", paper) not in taken:
            extra.append(Assignment(paper=paper, reviewer="QUA-R1", score=0.0))
            break
    index = session.reviewer_index()
    paper_at = session.paper_index()
    reviewer = np.array([index[a.reviewer] for a in extra])
    paper = np.array([paper_at[a.paper] for a in extra])
    score = np.array([a.score for a in extra])
    forged = plan.model_copy(
        update={"assignments": extra, "figures": plan_figures(session, reviewer, paper, score)}
    )
    with pytest.raises(PlanCheckError, match="allowed overload 1"):
        check_plan(session, forged, None)


def _ortools_least_overload(session: Session, allowance: int) -> tuple[int, int, int]:
    """(max required coverage, max coverage, least overload there) by OR-tools min-cost flow.

    Both coverages are maximal together (augmenting paths never lower a paper's count), so one
    max flow at least cost, paying -W per required review and 1 per paper above cap, gives all.
    """
    inst = reference_instance(session)
    n_r, n_p = len(inst.cap), len(inst.reviews)
    s, t = n_r + n_p, n_r + n_p + 1
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    for j in range(n_r):
        solver.add_arc_with_capacity_and_unit_cost(s, j, int(inst.cap[j]), 0)
        solver.add_arc_with_capacity_and_unit_cost(s, j, allowance, 1)
    for j, i in inst.pairs:
        solver.add_arc_with_capacity_and_unit_cost(int(j), n_r + int(i), 1, 0)
    weight = allowance * n_r + 1
    for i in range(n_p):
        required = int(inst.min_reviews[i])
        solver.add_arc_with_capacity_and_unit_cost(n_r + i, t, required, -weight)
        solver.add_arc_with_capacity_and_unit_cost(n_r + i, t, int(inst.reviews[i]) - required, 0)
    total = int(inst.reviews.sum())
    solver.set_node_supply(s, total)
    solver.set_node_supply(t, -total)
    assert solver.solve_max_flow_with_min_cost() == solver.OPTIMAL
    cost = solver.optimal_cost()
    required = -(cost // weight)  # the overload part is below one weight
    overload = cost + required * weight
    return required, solver.maximum_flow(), overload


@pytest.mark.parametrize("seed", range(30))
def test_overload_is_the_least_that_reaches_max_coverage(seed: int) -> None:
    allowance = 1 + seed % 3
    session = with_allowance(random_session(1300 + seed, unscored="exclude"), allowance)
    outcome = make_plan(session)
    plan = outcome.plan
    assert plan.checked
    over, _ = load_issues(session, plan)
    # Reference: OR-tools SimpleMinCostFlow with one cost unit per paper above cap.
    required, coverage, least = _ortools_least_overload(session, allowance)
    assert (plan.figures.required_coverage, plan.figures.coverage) == (required, coverage)
    assert sum(x.excess for x in over) == least
