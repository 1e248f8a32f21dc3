"""Make an optimal plan: build the network, solve it, decode it, and have it checked."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

import numpy as np

from review_alloc.flow import min_cost_flow
from review_alloc.model import Assignment, Plan, Session
from review_alloc.plan.checker import check_plan
from review_alloc.plan.figures import plan_figures
from review_alloc.plan.network import SCORE_RESOLUTION, PlanNetwork, build_network

METHOD = "lexicographic min-cost flow (primal-dual with Dinic blocking flows)"


@dataclass(frozen=True)
class PlanOutcome:
    """A checked plan with the network it came from and its dual certificate."""

    plan: Plan
    network: PlanNetwork
    potentials: np.ndarray


def make_plan(
    session: Session,
    *,
    fresh: bool = False,
    earlier: Plan | None = None,
    now: datetime | None = None,
) -> PlanOutcome:
    """Solve the session's lexicographic objective exactly and return the checked plan.

    A re-plan keeps the pairs of `earlier` (default: the session's current plan) as a tier just
    above score, so it moves as few reviews as coverage and floors allow; `fresh` ignores it.
    """
    base = None if fresh else (earlier if earlier is not None else session.plan)
    net = build_network(session, earlier=base)
    result = min_cost_flow(
        net.n_nodes, net.tails, net.heads, net.capacities, net.costs, lower=net.lower
    )
    chosen = np.flatnonzero(result.flow[net.pair_arcs] > 0)
    reviewer = net.pair_reviewer[chosen]
    paper = net.pair_paper[chosen]
    score = net.pair_score[chosen]
    order = np.lexsort((reviewer, paper))
    reviewer, paper, score = reviewer[order], paper[order], score[order]
    assignments = [
        Assignment(paper=session.papers[i].id, reviewer=session.reviewers[j].id, score=float(s))
        for j, i, s in zip(reviewer.tolist(), paper.tolist(), score.tolist(), strict=True)
    ]
    plan = Plan(
        assignments=assignments,
        figures=plan_figures(session, reviewer, paper, score),
        created_at=now or datetime.now(UTC),
        checked=False,
        method=METHOD
        + (", keeping earlier pairs" if net.kept is not None else "")
        + (
            f", scores in steps of 1/{net.resolution} to fit the keep tier"
            if net.resolution != SCORE_RESOLUTION
            else ""
        ),
    )
    check_plan(session, plan, result.potentials, network=net)
    return PlanOutcome(
        plan=plan.model_copy(update={"checked": True}), network=net, potentials=result.potentials
    )
