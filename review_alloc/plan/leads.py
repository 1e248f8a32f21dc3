"""One lead reviewer per paper, chosen among its assigned reviewers, at most `max_leads` each.

Each paper takes exactly one lead, so giving every reviewer `max_leads` copies ("slots") turns
the choice into a one-to-one assignment of papers to slots, which the Hungarian method solves
exactly (scipy's `linear_sum_assignment`). The slot matrix is dense, so above
`DENSE_LIMIT` entries (a large venue) the same choice is solved on the equivalent sparse
network (source → reviewer, capacity `max_leads` → paper along assigned pairs → sink), one tier
at a time, which is just as exact. The order is lexicographic: first as many papers as
possible get a lead, then as many of them as possible get a senior lead, then the total score of
the lead pairs is highest.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.figures import assignment_indices

_RESOLUTION = 10_000
DENSE_LIMIT = 4_000_000
"""Most entries of the dense slot matrix; larger choices go through the sparse flow."""


@dataclass(frozen=True)
class LeadChoice:
    """Lead reviewer by paper id, and the papers without a lead or without a senior lead."""

    lead_of: dict[str, str]
    no_lead: tuple[str, ...]
    no_senior_lead: tuple[str, ...]


def lead_costs(score_int: np.ndarray, n_papers: int) -> tuple[int, int]:
    """Weights (per lead, per senior lead) that make the assignment costs lexicographic: a lead
    outweighs any senior and score difference over all papers, a senior any score difference."""
    per_senior = n_papers * (int(score_int.max(initial=0)) + 1) + 1
    per_lead = n_papers * (per_senior + int(score_int.max(initial=0))) + 1
    return per_lead, per_senior


def pick_leads(session: Session, plan: Plan) -> LeadChoice:
    """Choose the leads of a plan: most papers led, then most senior leads, then best score."""
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    return lead_choice(session, reviewer, paper, lead_mask(session, reviewer, paper, score))


def lead_mask(
    session: Session, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray
) -> np.ndarray:
    """Which of the assigned pairs (index arrays) lead their paper, chosen as `pick_leads` does."""
    limit = session.policy.max_leads
    mask = np.zeros(len(paper), dtype=bool)
    if limit == 0 or len(paper) == 0:
        return mask
    papers_with = np.unique(paper)
    senior = session.reviewer_senior_array()[reviewer]
    score_int = np.rint(score * _RESOLUTION).astype(np.int64)
    loads = np.bincount(reviewer, minlength=len(session.reviewers))
    slots = np.minimum(loads, limit)
    if len(papers_with) * int(slots.sum()) > DENSE_LIMIT:
        mask[_leads_by_flow(reviewer, paper, senior, score_int, limit, len(session.reviewers))] = (
            True
        )
        return mask
    per_lead, per_senior = lead_costs(score_int, len(papers_with))
    gain = per_lead + per_senior * senior.astype(np.int64) + score_int
    people = np.flatnonzero(slots > 0)
    first_slot = np.zeros(len(session.reviewers), dtype=np.int64)
    first_slot[people] = np.cumsum(slots[people]) - slots[people]
    row_of = np.full(len(session.papers), -1, dtype=np.int64)
    row_of[papers_with] = np.arange(len(papers_with))
    # Not assigned = cost 0, assigned = a large negative cost: minimising takes as many
    # assigned pairs as possible, which is why entries outside the plan never win.
    cost = np.zeros((len(papers_with), int(slots.sum())), dtype=np.float64)
    pair_at = np.full(cost.shape, -1, dtype=np.int64)
    for k in range(limit):
        has = np.flatnonzero(slots[reviewer] > k)
        cell = (row_of[paper[has]], first_slot[reviewer[has]] + k)
        cost[cell] = -gain[has].astype(np.float64)
        pair_at[cell] = has
    # Imported here: scipy.optimize takes almost half a second to import, and every command
    # that never picks leads by the Hungarian method would pay it.
    from scipy.optimize import linear_sum_assignment

    rows, cols = linear_sum_assignment(cost)
    picked = cost[rows, cols] < 0
    mask[pair_at[rows[picked], cols[picked]]] = True
    return mask


def lead_choice(
    session: Session, reviewer: np.ndarray, paper: np.ndarray, mask: np.ndarray
) -> LeadChoice:
    """The LeadChoice of the pairs marked in `mask`, with the papers left without (senior) lead."""
    paper_ids = [p.id for p in session.papers]
    reviewer_ids = [r.id for r in session.reviewers]
    lead_of = {
        paper_ids[i]: reviewer_ids[j]
        for i, j in zip(paper[mask].tolist(), reviewer[mask].tolist(), strict=True)
    }
    papers_with = np.unique(paper)
    led = np.zeros(len(session.papers), dtype=bool)
    led[paper[mask]] = True
    senior_led = np.zeros(len(session.papers), dtype=bool)
    senior_led[paper[mask & session.reviewer_senior_array()[reviewer]]] = True
    no_lead = tuple(paper_ids[i] for i in papers_with[~led[papers_with]].tolist())
    no_senior = tuple(paper_ids[i] for i in papers_with[~senior_led[papers_with]].tolist())
    return LeadChoice(lead_of=lead_of, no_lead=no_lead, no_senior_lead=no_senior)


def _leads_by_flow(
    reviewer: np.ndarray, paper: np.ndarray, senior: np.ndarray, score_int: np.ndarray,
    limit: int, n_reviewers: int,
) -> np.ndarray:
    """Indices of the assigned pairs chosen as leads, by three small exact flow solves.

    One combined cost would need weights of about papers**2 times the score range, beyond what
    cost scaling can price in int64 on a large venue (the slow fallback took seconds). Fixing
    each tier before the next keeps every cost tiny: the most papers led (a maximum flow), then
    the most senior leads with that many papers led, then the best score with both fixed. The
    source feeds senior and junior reviewers through two hubs, so the senior count is the flow
    on one arc.
    """
    from review_alloc.flow import max_flow, min_cost_flow

    papers, local = np.unique(paper, return_inverse=True)
    n_p = len(papers)
    # Nodes: source, senior hub, junior hub, reviewers, papers, sink.
    source, senior_hub, junior_hub = 0, 1, 2
    first_reviewer = 3
    first_paper = first_reviewer + n_reviewers
    sink = first_paper + n_p
    n = sink + 1
    is_senior = np.zeros(n_reviewers, dtype=bool)
    is_senior[reviewer[senior]] = True
    hub = np.where(is_senior, senior_hub, junior_hub)
    tails = np.concatenate([
        [source, source], hub, first_reviewer + reviewer, first_paper + np.arange(n_p),
    ]).astype(np.int64)
    heads = np.concatenate([
        [senior_hub, junior_hub], first_reviewer + np.arange(n_reviewers), first_paper + local,
        np.full(n_p, sink),
    ]).astype(np.int64)
    upper = np.concatenate([
        [n_p, n_p], np.full(n_reviewers, limit), np.ones(len(paper)), np.ones(n_p),
    ]).astype(np.int64)
    pairs = slice(2 + n_reviewers, 2 + n_reviewers + len(paper))
    led = max_flow(n, tails, heads, upper, source, sink).value

    # The return arc sink -> source carries exactly `led` units in both weighted solves.
    tails = np.append(tails, sink)
    heads = np.append(heads, source)
    upper = np.append(upper, led)
    lower = np.zeros(len(tails), dtype=np.int64)
    lower[-1] = led
    costs = np.zeros(len(tails), dtype=np.int64)
    costs[0] = -1
    if senior.all() or not senior.any():
        # Every lead is senior, or none can be: the count needs no solve.
        seniors = led if senior.all() else 0
    else:
        seniors = min_cost_flow(n, tails, heads, upper, costs, lower=lower).flow[0]

    lower[0] = upper[0] = seniors
    costs[0] = 0
    costs[pairs] = -score_int
    flow = min_cost_flow(n, tails, heads, upper, costs, lower=lower).flow
    return np.flatnonzero(flow[pairs] > 0)


def with_leads(plan: Plan, choice: LeadChoice) -> Plan:
    """The plan with `lead` set on the chosen assignments and cleared on the others."""
    assignments = [
        a.model_copy(update={"lead": choice.lead_of.get(a.paper) == a.reviewer})
        for a in plan.assignments
    ]
    return plan.model_copy(update={"assignments": assignments})
