"""The cap-raise fix: the least total cap increase that reaches the best coverage caps can give.

A min-cost flow with unit "raise" arcs source → reviewer on the `reviews` tier's coverage
network. It first reaches the best coverage that raising caps can give (every paper up to its
eligible reviewers), then takes the fewest raise units; among those it spreads the raises over
people (the k-th extra paper asked of one reviewer costs more than a first one asked of another)
and prefers pairs with higher scores. Only the total is a hard optimum; the rest is a tie-break.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.flow import max_flow, min_cost_flow
from review_alloc.plan.explain import CoverageNetwork
from review_alloc.plan.figures import active_demands
from review_alloc.plan.fixes.common import Unclosable, paper_inflow
from review_alloc.plan.weights import COST_LIMIT

PREFERENCE_STEPS = 100
"""Score steps used by the tie-break of the cap-raise fix (scores scaled to 0..100)."""


@dataclass(frozen=True)
class CapRaise:
    """One reviewer's suggested cap raise."""

    reviewer: str
    name: str
    cap: int
    raise_by: int
    new_cap: int
    papers: tuple[str, ...]
    """Short papers this reviewer would take in the flow that proves the fix."""


@dataclass(frozen=True)
class CapRaiseFix:
    """The least total cap increase that reaches the best coverage raising caps can give."""

    total: int
    raises: tuple[CapRaise, ...]
    coverage_before: int
    coverage_after: int
    demand: int
    unclosable: tuple[Unclosable, ...]


def raise_caps_fix(cov: CoverageNetwork) -> CapRaiseFix:
    """The exact least total cap increase (and on whom) for the `reviews` tier's network."""
    session, net = cov.session, cov.plan_net
    n_r, n_p = net.n_reviewers, net.n_papers
    source, sink = 0, 1 + n_r + n_p
    degree = np.bincount(net.pair_reviewer, minlength=n_r).astype(np.int64)
    shortfall = cov.shortfall
    room = np.zeros(n_r, dtype=np.int64)
    # Only reviewers on the cut's sink side can turn extra capacity into coverage.
    candidates = cov.reviewers_on_sink_side()
    room[candidates] = np.clip(degree[candidates] - cov.capacity[candidates], 0, shortfall)
    raisers = np.flatnonzero(room > 0)

    unit_reviewer = np.repeat(raisers, room[raisers])
    unit_rank = np.concatenate(
        [np.zeros(0, np.int64), *(np.arange(k, dtype=np.int64) for k in room[raisers])]
    )
    tails = np.concatenate([cov.tails, np.zeros(len(unit_reviewer), np.int64)]).astype(np.int64)
    heads = np.concatenate([cov.heads, 1 + unit_reviewer]).astype(np.int64)
    caps = np.concatenate([cov.capacities, np.ones(len(unit_reviewer), np.int64)])
    lower = np.concatenate([cov.lower, np.zeros(len(unit_reviewer), np.int64)])
    best = max_flow(
        cov.n_nodes, tails, heads, caps, source, sink, lower=lower if lower.any() else None
    ).value

    score = net.pair_score
    top = float(score.max()) if len(score) else 0.0
    prefer = (
        PREFERENCE_STEPS - np.rint(PREFERENCE_STEPS * score / top).astype(np.int64)
        if top > 0
        else np.zeros(len(score), np.int64)
    )
    score_span = PREFERENCE_STEPS * max(best, 1) + 1
    spread_span = score_span * (shortfall * (shortfall + 1) // 2 + 1)
    w_raise = spread_span + score_span
    costs = np.zeros(len(tails), dtype=np.int64)
    costs[cov.pair_arcs] = prefer
    costs[len(cov.tails) :] = w_raise + unit_rank * score_span
    if w_raise * (shortfall + 1) * 4 >= COST_LIMIT:
        raise OverflowError("the cap-raise model is too large to weigh exactly")
    supplies = np.zeros(cov.n_nodes, dtype=np.int64)
    supplies[source], supplies[sink] = best, -best
    result = min_cost_flow(
        cov.n_nodes,
        tails,
        heads,
        caps,
        costs,
        supplies=supplies,
        lower=lower if lower.any() else None,
    )
    flow = np.asarray(result.flow)
    raised = np.bincount(unit_reviewer, weights=flow[len(cov.tails) :], minlength=n_r).astype(
        np.int64
    )
    short = cov.demand - paper_inflow(cov) > 0
    pair_flow = flow[cov.pair_arcs]
    raises = []
    _, _, cap, _ = active_demands(session)
    for j in np.flatnonzero(raised):
        took = np.flatnonzero((net.pair_reviewer == j) & (pair_flow > 0) & short[net.pair_paper])
        raises.append(
            CapRaise(
                reviewer=session.reviewers[j].id,
                name=session.reviewers[j].name,
                cap=int(cap[j]),
                raise_by=int(raised[j]),
                new_cap=int(cap[j] + raised[j]),
                papers=tuple(session.papers[i].id for i in net.pair_paper[took]),
            )
        )
    raises.sort(key=lambda r: (-r.raise_by, r.reviewer))
    p_degree = np.bincount(net.pair_paper, minlength=n_p)
    unclosable = tuple(
        Unclosable(
            paper=session.papers[i].id,
            missing=int(cov.demand[i] - p_degree[i]),
            reason=f"only {int(p_degree[i])} eligible reviewers for {int(cov.demand[i])} reviews",
        )
        for i in np.flatnonzero(p_degree < cov.demand)
    )
    return CapRaiseFix(
        total=int(raised.sum()),
        raises=tuple(raises),
        coverage_before=cov.value,
        coverage_after=int(best),
        demand=int(cov.demand.sum()),
        unclosable=unclosable,
    )
