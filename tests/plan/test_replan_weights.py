"""The keep tier's weights: they dominate what lies below them and fit int64 on large venues."""

from __future__ import annotations

import numpy as np
import pytest

import review_alloc.plan.weights as weights
from review_alloc.model import load_session
from review_alloc.plan import build_network
from review_alloc.plan.weights import SCORE_RESOLUTION, constraint_weights, fitting_weights
from review_alloc.workspace import Workspace
from tests.plan.replan_reference import replan_instance, replan_optimum
from tests.plan.test_planner import random_session
from tests.plan.test_replan_random import _random_change


@pytest.mark.parametrize(("arcs", "top"), [(2, 0), (4, 10_000), (30_000, 3_558), (1_400, 10_000)])
def test_each_weight_outweighs_every_tier_below_it_in_one_cycle(arcs: int, top: int) -> None:
    w = constraint_weights(arcs, top, 0, 0, keep=True)
    # A simple cycle moves each count tier by at most 1, the kept count by at most `arcs`
    # and the score by at most `arcs * top`: each weight must beat everything below it.
    assert w.keep > arcs * top
    assert w.floors > arcs * w.keep + arcs * top
    assert w.coverage > w.floors + arcs * w.keep + arcs * top
    assert w.required > w.coverage + w.floors + arcs * w.keep + arcs * top
    fresh = constraint_weights(arcs, top, 0, 0)
    assert fresh.keep == 0 and fresh.floors == arcs * top + 1  # a fresh plan has no keep tier


def test_the_largest_venue_fits_int64_with_a_coarser_score_step() -> None:
    # 20,000 papers x 3 reviews, 15,000 reviewers (so up to 30,000 pair arcs in a cycle),
    # scores in 0..1: at 10,000 steps the keep tier would pass the int64 headroom.
    arcs, demand = 2 * 15_000, 3 * 20_000
    step, _ = fitting_weights(1.0, 0.0, arcs, 0, 8, demand, 2, overload=False, keep=True)
    assert 3_000 < step < SCORE_RESOLUTION

    def worst(s: int) -> int:
        w = constraint_weights(arcs, s, 0, 0, keep=True)
        return (w.required + w.coverage + s + w.keep) * demand * 4

    assert worst(step) < weights.COST_LIMIT <= worst(step + 1)
    assert worst(SCORE_RESOLUTION) > weights.COST_LIMIT
    fresh_step, _ = fitting_weights(1.0, 0.0, arcs, 0, 8, demand, 2, overload=False, keep=False)
    assert fresh_step == SCORE_RESOLUTION


def test_the_conference_sample_re_plans_at_a_fine_score_step() -> None:
    # With its senior rule (one senior node per paper) and the keep tier, the conference sample
    # needs a coarser step than 1/10,000 to fit int64, but stays finer than 1/1,000.
    ws = Workspace(load_session("sample_sessions/conference.json"))
    ws.solve()
    net = build_network(ws.session, earlier=ws.session.plan)
    assert 1_000 <= net.resolution <= SCORE_RESOLUTION and net.keep_weight > 0
    assert int(net.kept.sum()) == len(ws.session.plan.assignments)


@pytest.mark.parametrize("seed", range(8))
def test_a_coarser_score_step_keeps_every_count_tier_exact(
    seed: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Shrink the headroom so that these small sessions take the large-venue path.
    monkeypatch.setattr(weights, "COST_LIMIT", 2**24)
    rng = np.random.default_rng(seed)
    ws = Workspace(random_session(600 + seed))
    ws.solve(fresh=True)
    for k in range(3):
        _random_change(ws, rng, k)
    earlier = ws.plan_of(ws.session.revision)
    outcome = ws.solve()
    assert outcome.network.resolution < SCORE_RESOLUTION
    assert f"steps of 1/{outcome.network.resolution}" in outcome.plan.method
    f = outcome.plan.figures
    before = {(a.reviewer, a.paper) for a in earlier.assignments}
    kept = sum((a.reviewer, a.paper) in before for a in outcome.plan.assignments)
    # Reference: HiGHS (scipy.optimize.linprog) staged tiers, counts only.
    ref = replan_optimum(replan_instance(ws.session, earlier), with_score=False)
    assert (f.required_coverage, f.coverage, f.floors_met, kept) == ref
