"""After a plan made without the keep tier, the workspace readies the start of the next
re-plan: the same session planned keeping that plan, whose optimum is the same pairs with the
weights a re-plan patches. The first re-plan after a fresh plan is then patched too."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.plan import make_plan
from review_alloc.workspace import Workspace, ready_for_replan
from tests.plan.test_patch import _assert_same_optimum, _change, _rules_session
from tests.plan.test_planner import random_session


def _pairs(plan: object) -> set[tuple[str, str]]:
    return {(a.reviewer, a.paper) for a in plan.assignments}  # type: ignore[attr-defined]


@pytest.mark.parametrize("seed", range(24))
def test_the_first_replan_after_a_fresh_plan_is_patched_and_optimal(seed: int) -> None:
    rng = np.random.default_rng(9100 + seed)
    session = random_session(9200 + seed) if seed < 12 else _rules_session(seed)
    ws = Workspace(session)
    fresh = ws.solve(fresh=True)
    assert fresh.network.kept is None
    successor = ready_for_replan(fresh)
    if successor is not fresh:
        # The keep tier's optimum is the fresh plan itself (common practice of lexicographic
        # objectives: keeping every pair of an optimal plan loses nothing above the keep tier).
        assert _pairs(successor.plan) == _pairs(fresh.plan)
        assert successor.network.kept is not None
    assert successor.kept.state is not None
    ws.adopt_warm(fresh, successor)
    assert ws.last_outcome is successor
    for _ in range(int(rng.integers(1, 3))):
        _change(ws, rng)
    earlier = ws.earlier_plan()
    outcome = ws.solve()
    # The optimum of the patched network equals a freshly built one's (OR-Tools
    # SimpleMinCostFlow on both), and the plan equals a cold plan's in every tier.
    if outcome.patched:
        from review_alloc.plan.network import build_network

        _assert_same_optimum(outcome.network, build_network(ws.session, earlier=earlier))
    cold = make_plan(ws.session, earlier=earlier, patch=False)
    for tier in ("required", "seniors", "coverage", "floors"):
        assert outcome.tiers[tier] == cold.tiers[tier]
    assert outcome.tiers["score"] == pytest.approx(cold.tiers["score"], abs=1e-6)


def test_most_first_replans_are_patched() -> None:
    patched = 0
    for seed in range(12):
        rng = np.random.default_rng(9300 + seed)
        ws = Workspace(random_session(9400 + seed))
        fresh = ws.solve(fresh=True)
        ws.adopt_warm(fresh, ready_for_replan(fresh))
        reviewers = ws.session.reviewers
        ws.withdraw_reviewer(reviewers[int(rng.integers(len(reviewers)))].id, "illness")
        patched += ws.solve().patched
    assert patched >= 10


def test_a_newer_plan_is_not_replaced_by_an_older_successor() -> None:
    ws = Workspace(random_session(9500))
    first = ws.solve(fresh=True)
    successor = ready_for_replan(first)
    second = ws.solve(fresh=True)
    ws.adopt_warm(first, successor)
    assert ws.last_outcome is second
