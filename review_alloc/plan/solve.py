"""Make an optimal plan: build the network, solve it, decode it, and have it checked."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

import numpy as np

from review_alloc.flow import WarmStart, min_cost_flow
from review_alloc.model import Assignment, Plan, Session
from review_alloc.plan.checker import check_plan
from review_alloc.plan.figures import plan_figures
from review_alloc.plan.network import PlanNetwork, build_network

METHOD = "lexicographic min-cost flow (cost scaling; re-plans warm-started by primal-dual)"


@dataclass(frozen=True)
class PlanOutcome:
    """A checked plan with the network it came from and its dual certificate."""

    plan: Plan
    network: PlanNetwork
    potentials: np.ndarray
    flow: np.ndarray | None = None
    """The optimal flow on `network`'s edges, kept so the next plan can start from it."""


def _node_map(old: PlanNetwork, new: PlanNetwork) -> np.ndarray:
    """New node id of every old node (-1 where it has none); reviewers and papers keep indices."""
    mapping = np.full(old.n_nodes, -1, dtype=np.int64)
    mapping[old.source] = new.source
    mapping[old.sink] = new.sink
    r = min(old.n_reviewers, new.n_reviewers)
    mapping[1 : 1 + r] = 1 + np.arange(r)
    p = min(old.n_papers, new.n_papers)
    mapping[1 + old.n_reviewers : 1 + old.n_reviewers + p] = 1 + new.n_reviewers + np.arange(p)
    return mapping


def warm_start_for(previous: PlanOutcome, net: PlanNetwork) -> WarmStart | None:
    """Carry the previous optimal flow and potentials over to a new network of the planner.

    Arcs are matched by kind and by the reviewer and paper they belong to, so withdrawals, new
    conflicts, blocks, pins and changed caps all map; arcs without a match start empty.
    """
    old = previous.network
    if previous.flow is None or len(previous.flow) != len(old.tails):
        return None
    flow = np.zeros(len(net.tails), dtype=np.int64)
    r = min(old.n_reviewers, net.n_reviewers)
    p = min(old.n_papers, net.n_papers)
    for block, count in (
        ("floor_arcs", r), ("rest_arcs", r), ("required_arcs", p), ("extra_arcs", p)
    ):
        to, of = getattr(net, block).start, getattr(old, block).start
        flow[to : to + count] = previous.flow[of : of + count]
    flow[net.return_arc] = previous.flow[old.return_arc]
    width = max(old.n_papers, net.n_papers, 1)
    _, new_at, old_at = np.intersect1d(
        net.pair_reviewer * width + net.pair_paper,
        old.pair_reviewer * width + old.pair_paper,
        assume_unique=True,
        return_indices=True,
    )
    flow[net.pair_arcs.start + new_at] = previous.flow[old.pair_arcs.start + old_at]

    potentials = np.zeros(net.n_nodes, dtype=np.int64)
    mapping = _node_map(old, net)
    kept = mapping >= 0
    potentials[mapping[kept]] = previous.potentials[kept]
    return WarmStart(flow=flow, potentials=potentials)


def make_plan(
    session: Session, *, now: datetime | None = None, warm: PlanOutcome | None = None
) -> PlanOutcome:
    """Solve the session's lexicographic objective exactly and return the checked plan.

    With `warm` (the outcome of an earlier plan of this session, before a small change such as
    a withdrawal, a cap change or a new conflict), the solver restarts from that plan's flow and
    potentials; the result is just as optimal and checked.
    """
    net = build_network(session)
    start = None if warm is None else warm_start_for(warm, net)
    result = min_cost_flow(
        net.n_nodes, net.tails, net.heads, net.capacities, net.costs, lower=net.lower, warm=start
    )
    chosen = np.flatnonzero(result.flow[net.pair_arcs] > 0)
    reviewer = net.pair_reviewer[chosen]
    paper = net.pair_paper[chosen]
    score = net.pair_score[chosen]
    order = np.lexsort((reviewer, paper))
    reviewer, paper, score = reviewer[order], paper[order], score[order]
    # The ids come from the validated session and the scores from its validated table, so
    # re-validating thousands of rows would only slow every re-plan down.
    paper_ids = [p.id for p in session.papers]
    reviewer_ids = [r.id for r in session.reviewers]
    assignments = [
        Assignment.model_construct(paper=paper_ids[i], reviewer=reviewer_ids[j], score=float(s))
        for j, i, s in zip(reviewer.tolist(), paper.tolist(), score.tolist(), strict=True)
    ]
    plan = Plan(
        assignments=assignments,
        figures=plan_figures(session, reviewer, paper, score),
        created_at=now or datetime.now(UTC),
        checked=False,
        method=METHOD,
    )
    check_plan(session, plan, result.potentials, network=net)
    return PlanOutcome(
        plan=plan.model_copy(update={"checked": True}),
        network=net,
        potentials=result.potentials,
        flow=result.flow,
    )
