"""Re-plans after seeded random changes, against HiGHS: coverage first, then most pairs kept."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.model import Paper, Reviewer
from review_alloc.plan import check_plan, make_plan
from review_alloc.workspace import ChangeRefused, Workspace
from tests.plan.replan_reference import ortools_count_optimum, replan_instance, replan_optimum
from tests.plan.test_planner import random_session


def _random_change(ws: Workspace, rng: np.random.Generator, step: int) -> None:
    """One random change; a refused one is simply not made (as a chair would see)."""
    s = ws.session
    plan = s.plan
    r = s.reviewers[int(rng.integers(len(s.reviewers)))].id
    p = s.papers[int(rng.integers(len(s.papers)))].id
    kind = int(rng.integers(10))
    try:
        if kind == 0:
            ws.withdraw_reviewer(r, "illness")
        elif kind == 1:
            ws.withdraw_paper(p, "withdrawn by authors")
        elif kind == 2:
            gone = [x.id for x in s.reviewers if x.withdrawn] or [r]
            ws.reinstate_reviewer(gone[0])
        elif kind == 3 and plan is not None and plan.assignments:
            a = plan.assignments[int(rng.integers(len(plan.assignments)))]
            ws.declare_conflict(a.reviewer, a.paper, "declared late")
        elif kind == 4 and plan is not None and plan.assignments:
            a = plan.assignments[int(rng.integers(len(plan.assignments)))]
            ws.block(a.reviewer, a.paper, "asked not to")
        elif kind == 5:
            ws.set_reviewer(r, cap=int(rng.integers(0, 4)), floor=0)
        elif kind == 6:
            ws.set_paper(p, reviews=int(rng.integers(1, 5)), min_reviews=1)
        elif kind == 7:
            papers = [x.id for x in s.papers]
            picks = rng.choice(len(papers), size=min(4, len(papers)), replace=False)
            ws.add_reviewer(
                Reviewer(id=f"new-r{step}", cap=2),
                scores={papers[k]: float(np.round(rng.uniform(0, 1), 2)) for k in picks},
            )
        elif kind == 8:
            people = [x.id for x in s.reviewers]
            picks = rng.choice(len(people), size=min(3, len(people)), replace=False)
            ws.add_paper(
                Paper(id=f"new-p{step}", title="An invented late paper"),
                scores={people[k]: float(np.round(rng.uniform(0, 1), 2)) for k in picks},
            )
        else:
            ws.pin(r, p, "chair's choice")
    except ChangeRefused:
        pass


@pytest.mark.parametrize("seed", range(30))
def test_each_replan_keeps_as_many_earlier_pairs_as_highs_allows(seed: int) -> None:
    rng = np.random.default_rng(1000 + seed)
    session = random_session(300 + seed, unscored="exclude" if seed % 2 else "zero")
    ws = Workspace(session)
    ws.solve()
    for round_ in range(3):
        for k in range(int(rng.integers(1, 4))):
            _random_change(ws, rng, 10 * round_ + k)
        earlier = ws.plan_of(ws.session.revision)
        outcome = ws.solve()
        f = outcome.plan.figures
        # Reference: HiGHS (scipy.optimize.linprog), the tiers maximised one after another.
        ref = replan_optimum(replan_instance(ws.session, earlier))
        before = {(a.reviewer, a.paper) for a in earlier.assignments}
        kept = sum((a.reviewer, a.paper) in before for a in outcome.plan.assignments)
        assert (f.required_coverage, f.coverage, f.floors_met, kept) == ref[:4]
        assert f.total_score == pytest.approx(ref[4], abs=1e-6)
        assert ws.revisions[-1].kept == kept
        # The checker passes the plan again from scratch, with its certificate.
        check_plan(ws.session, outcome.plan, outcome.potentials, earlier=earlier)
        assert outcome.plan.checked


@pytest.mark.parametrize("seed", range(10))
def test_a_fresh_plan_matches_the_plain_optimum_and_keeps_no_fewer_than_chance(seed: int) -> None:
    session = random_session(400 + seed)
    ws = Workspace(session)
    ws.solve()
    first = ws.session.plan
    rng = np.random.default_rng(seed)
    for k in range(3):
        _random_change(ws, rng, k)
    kept_plan = ws.solve().plan
    fresh_plan = ws.solve(fresh=True).plan
    assert ws.revisions[-1].fresh and not ws.revisions[-2].fresh
    # Same counts in the tiers above the keep tier; the fresh plan is the plain optimum.
    for name in ("required_coverage", "coverage", "floors_met"):
        assert getattr(kept_plan.figures, name) == getattr(fresh_plan.figures, name)
    assert fresh_plan.figures == make_plan(ws.session, fresh=True).plan.figures
    before = {(a.reviewer, a.paper) for a in first.assignments}
    kept_k = sum((a.reviewer, a.paper) in before for a in kept_plan.assignments)
    kept_f = sum((a.reviewer, a.paper) in before for a in fresh_plan.assignments)
    assert kept_k >= kept_f
    assert kept_plan.figures.total_score <= fresh_plan.figures.total_score + 1e-9


def test_a_conflict_declared_after_a_plan_is_gone_from_the_next_plan() -> None:
    ws = Workspace(random_session(17))
    ws.solve()
    pairs = [(a.reviewer, a.paper) for a in ws.session.plan.assignments[:3]]
    for r, p in pairs:
        ws.declare_conflict(r, p, "late disclosure")
    ws.solve()
    now = {(a.reviewer, a.paper) for a in ws.session.plan.assignments}
    assert not now & set(pairs)
    assert ws.session.plan.checked


@pytest.mark.parametrize("seed", range(15))
def test_the_two_references_agree_on_the_count_tiers(seed: int) -> None:
    rng = np.random.default_rng(seed)
    ws = Workspace(random_session(700 + seed))
    ws.solve()
    for k in range(3):
        _random_change(ws, rng, k)
    ws.session = ws.session.model_copy(update={"pins": []})
    inst = replan_instance(ws.session, ws.plan_of(1))
    # References: OR-tools SimpleMinCostFlow (weighted counts) and HiGHS (staged LPs).
    assert ortools_count_optimum(inst) == replan_optimum(inst, with_score=False)
    outcome = ws.solve()
    before = {(a.reviewer, a.paper) for a in ws.plan_of(1).assignments}
    f = outcome.plan.figures
    kept = sum((a.reviewer, a.paper) in before for a in outcome.plan.assignments)
    assert (f.required_coverage, f.coverage, f.floors_met, kept) == ortools_count_optimum(inst)
