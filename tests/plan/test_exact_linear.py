"""The linear stage of the crossing rules' exact program: its checked bound and its fixing hold
against the integer program's proven optimum (HiGHS) on random 46-paper sessions."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.plan import exact, make_plan
from review_alloc.plan.conflicts import conflict_pairs
from review_alloc.plan.solve import _solve_split
from tests.plan.test_constraints_reference import rules_session


@pytest.mark.parametrize("seed", range(6))
def test_the_linear_bound_and_its_fixing_hold_for_every_optimal_plan(seed: int) -> None:
    session = rules_session(
        700 + seed, (19, 46), senior_min=1, max_per_institution=1, min_reviews=2
    )
    root = _solve_split(session, None, {}, conflict_pairs(session), None)
    # The relaxation breaks the crossing rule on these sessions, so the groups are in play.
    assert root.violated
    m = 1
    net, flow = root.net, root.result.flow
    objectives = exact.pair_objectives(net)
    groups = exact.mixed_groups(net)
    upper = exact.exact_tiers(net, flow[net.pair_arcs] > 0, m)
    # The reference: the plan proven optimal by the integer program (HiGHS, status optimal).
    outcome = make_plan(session)
    assert outcome.proof is not None and outcome.proof.proven
    rid = {r.id: j for j, r in enumerate(session.reviewers)}
    pid = {p.id: i for i, p in enumerate(session.papers)}
    chosen = {(rid[a.reviewer], pid[a.paper]) for a in outcome.plan.assignments}
    used = np.array(
        [(int(j), int(i)) in chosen for j, i in zip(net.pair_reviewer, net.pair_paper, strict=True)]
    )
    best = exact.exact_tiers(net, used, m)
    settled: dict[str, int] = {}
    every = np.ones(len(net.tails), dtype=bool)
    fixed_any = False
    for name in exact.EXACT_TIERS:
        # Known value one below the optimum leaves some slack, so the fixing is not trivial.
        stage = exact._lp_stage(
            net, m, groups, every, flow.astype(np.int64), objectives, settled, name,
            best[name] - 1, 30.0,
        )
        assert stage is not None
        assert stage.bound >= best[name]
        assert stage.bound <= upper[name] or any(settled[k] < upper[k] for k in settled)
        fixed = ~stage.free[net.pair_arcs]
        fixed_any = fixed_any or bool(fixed.any())
        # Every plan reaching the known value keeps the fixed arcs: the optimal one does too.
        assert np.array_equal(stage.values[net.pair_arcs][fixed] > 0, used[fixed])
        settled[name] = best[name]
    assert fixed_any
