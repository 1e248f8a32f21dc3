"""One lead reviewer per paper, chosen among its assigned reviewers, at most `max_leads` each.

Each paper takes exactly one lead, so giving every reviewer `max_leads` copies ("slots") turns
the choice into a one-to-one assignment of papers to slots, which the Hungarian method solves
exactly (scipy's `linear_sum_assignment`). The slot matrix is dense, so above
`DENSE_LIMIT` entries (a large venue) the same assignment is solved as the equivalent sparse
min-cost flow (source → reviewer, capacity `max_leads` → paper along assigned pairs → sink),
which is just as exact. The costs are lexicographic: first as many papers as
possible get a lead, then as many of them as possible get a senior lead, then the total score of
the lead pairs is highest.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import linear_sum_assignment

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
    limit = session.policy.max_leads
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    papers_with = np.unique(paper)
    if limit == 0 or len(paper) == 0:
        ids = tuple(session.papers[i].id for i in papers_with)
        return LeadChoice(lead_of={}, no_lead=ids, no_senior_lead=ids)
    senior = np.array([session.reviewers[j].senior for j in reviewer], dtype=bool)
    score_int = np.rint(score * _RESOLUTION).astype(np.int64)
    per_lead, per_senior = lead_costs(score_int, len(papers_with))

    loads = np.bincount(reviewer, minlength=len(session.reviewers))
    slots = np.minimum(loads, limit)
    gain = per_lead + per_senior * senior.astype(np.int64) + score_int
    if len(papers_with) * int(slots.sum()) > DENSE_LIMIT:
        chosen = _leads_by_flow(reviewer, paper, gain, limit, len(session.reviewers))
        lead_of = {session.papers[paper[k]].id: session.reviewers[reviewer[k]].id for k in chosen}
        return _choice(session, papers_with, lead_of)
    people = np.flatnonzero(slots > 0)
    first_slot = np.zeros(len(session.reviewers), dtype=np.int64)
    first_slot[people] = np.cumsum(slots[people]) - slots[people]
    row_of = np.full(len(session.papers), -1, dtype=np.int64)
    row_of[papers_with] = np.arange(len(papers_with))
    # Not assigned = cost 0, assigned = a large negative cost: minimising takes as many
    # assigned pairs as possible, which is why entries outside the plan never win.
    cost = np.zeros((len(papers_with), int(slots.sum())), dtype=np.float64)
    for k in range(limit):
        has = slots[reviewer] > k
        cost[row_of[paper[has]], first_slot[reviewer[has]] + k] = -gain[has].astype(np.float64)
    rows, cols = linear_sum_assignment(cost)
    picked = cost[rows, cols] < 0
    slot_owner = np.repeat(np.arange(len(session.reviewers)), slots)
    lead_of: dict[str, str] = {}
    for r, c in zip(rows[picked].tolist(), cols[picked].tolist(), strict=True):
        lead_of[session.papers[papers_with[r]].id] = session.reviewers[slot_owner[c]].id
    return _choice(session, papers_with, lead_of)


def _leads_by_flow(
    reviewer: np.ndarray, paper: np.ndarray, gain: np.ndarray, limit: int, n_reviewers: int
) -> np.ndarray:
    """Indices of the assigned pairs chosen as leads, by a min-cost circulation (exact)."""
    from review_alloc.flow import min_cost_flow

    papers, local = np.unique(paper, return_inverse=True)
    n_p = len(papers)
    source, sink = 0, 1 + n_reviewers + n_p
    n = sink + 1
    tails = np.concatenate(
        [np.zeros(n_reviewers, np.int64), 1 + reviewer, 1 + n_reviewers + np.arange(n_p), [sink]]
    )
    heads = np.concatenate(
        [1 + np.arange(n_reviewers), 1 + n_reviewers + local, np.full(n_p, sink), [source]]
    )
    capacities = np.concatenate(
        [np.full(n_reviewers, limit), np.ones(len(paper)), np.ones(n_p), [n_p]]
    ).astype(np.int64)
    costs = np.concatenate([np.zeros(n_reviewers), -gain, np.zeros(n_p), [0]]).astype(np.int64)
    result = min_cost_flow(n, tails.astype(np.int64), heads.astype(np.int64), capacities, costs)
    pair_flow = result.flow[n_reviewers : n_reviewers + len(paper)]
    return np.flatnonzero(pair_flow > 0)


def _choice(session: Session, papers_with: np.ndarray, lead_of: dict[str, str]) -> LeadChoice:
    no_lead = tuple(
        session.papers[i].id for i in papers_with if session.papers[i].id not in lead_of
    )
    is_senior = {r.id: r.senior for r in session.reviewers}
    no_senior = tuple(
        session.papers[i].id
        for i in papers_with
        if not is_senior.get(lead_of.get(session.papers[i].id, ""), False)
    )
    return LeadChoice(lead_of=lead_of, no_lead=no_lead, no_senior_lead=no_senior)


def with_leads(plan: Plan, choice: LeadChoice) -> Plan:
    """The plan with `lead` set on the chosen assignments and cleared on the others."""
    assignments = [
        a.model_copy(update={"lead": choice.lead_of.get(a.paper) == a.reviewer})
        for a in plan.assignments
    ]
    return plan.model_copy(update={"assignments": assignments})
