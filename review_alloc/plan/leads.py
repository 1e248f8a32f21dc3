"""One lead reviewer per paper, chosen among its assigned reviewers, at most `max_leads` each.

Each paper takes exactly one lead, so giving every reviewer `max_leads` copies ("slots") turns
the choice into a one-to-one assignment of papers to slots, which the Hungarian method solves
exactly (scipy's `linear_sum_assignment`). The slot matrix is dense, so above
`DENSE_LIMIT` entries (a large venue), or where its combined float64 costs would not be exact
(huge scores), the same method runs on the assigned pairs alone (`plan.lead_paths`: shortest
augmenting paths with two-part integer costs), which is just as exact; its score steps are made
coarser only where huge scores would not fit int64, as the plan's own are. The order is
lexicographic: first as many papers as possible get a lead, then as many of them as possible get
a senior lead, then the total score of the lead pairs is highest.

A re-plan chooses again from scratch: on the loose L benchmark the sparse choice takes about
5 ms for 60,000 pairs, less than mapping an earlier choice onto the new pairs would cost.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from operator import attrgetter

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.figures import assignment_indices
from review_alloc.plan.weights import COST_LIMIT, SCORE_RESOLUTION

DENSE_LIMIT = 4_000_000
"""Most entries of the dense slot matrix; larger choices go through the sparse pairs."""

EXACT_FLOAT = 2**53
"""Integers below this are exact in float64, the cost type of scipy's assignment solver."""


@dataclass(frozen=True)
class LeadChoice:
    """Lead reviewer by paper id, and the papers without a lead or without a senior lead."""

    lead_of: dict[str, str]
    no_lead: tuple[str, ...]
    no_senior_lead: tuple[str, ...]


def lead_costs(score_int: np.ndarray, n_papers: int) -> tuple[int, int]:
    """Weights (per lead, per senior lead) that make the assignment costs lexicographic: a lead
    outweighs any senior and score difference over all papers, a senior any score difference."""
    return _lead_weights(int(score_int.max(initial=0)), n_papers)


def _lead_weights(top: int, n_papers: int) -> tuple[int, int]:
    """`lead_costs` for score steps up to `top` (Python integers: they never overflow)."""
    per_senior = n_papers * (top + 1) + 1
    per_lead = n_papers * (per_senior + top) + 1
    return per_lead, per_senior


def _dense_fits(top: int, n_papers: int) -> bool:
    """Whether the dense choice stays exact in float64 with score steps up to `top`."""
    per_lead, per_senior = _lead_weights(top, n_papers)
    # The assignment solver's duals are sums of up to n_papers costs; 4 is headroom.
    return 4 * n_papers * (per_lead + per_senior + top) < EXACT_FLOAT


def _paths_fit(top: int, n_led: int, n_nodes: int) -> bool:
    """Whether the sparse choice's sums stay inside int64 with score steps up to `top`.

    Its potentials and distances stay within a few times the number of nodes times the largest
    gain part (each is a path's cost shifted by two potentials); 4 is headroom, as in
    `plan.weights.fitting_weights`.
    """
    return 4 * (n_nodes + 1) * (max(top, n_led + 2) + 1) < COST_LIMIT


def score_steps(score: np.ndarray, fits: Callable[[int], bool]) -> np.ndarray:
    """Scores as integer steps for the sparse lead choice: SCORE_RESOLUTION steps per unit, or
    the finest coarser step at which `fits(largest step count)` holds (`fits(0)` must hold).

    Like the plan's tier weights (`plan.weights.fitting_weights`), the count tiers (papers
    led, senior leads) stay exact and only ties between scores finer than a step are lost, so
    huge scores never overflow the costs.
    """
    top = float(score.max(initial=0.0))
    finest = int(np.rint(top * SCORE_RESOLUTION))
    if fits(finest):
        return np.rint(score * SCORE_RESOLUTION).astype(np.int64)
    low, high = 0, finest  # fits(low), not fits(high): the costs grow with the steps
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return np.minimum(np.rint(score * (low / top)), low).astype(np.int64)


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
    # The papers with reviews, counted without a sort (the dense path below lists them).
    n_led = int(np.count_nonzero(np.bincount(paper, minlength=len(session.papers))))
    senior = session.reviewer_senior_array()[reviewer]
    loads = np.bincount(reviewer, minlength=len(session.reviewers))
    slots = np.minimum(loads, limit)
    top = int(np.rint(float(score.max(initial=0.0)) * SCORE_RESOLUTION))
    if n_led * int(slots.sum()) > DENSE_LIMIT or not _dense_fits(top, n_led):
        n_nodes = len(session.papers) + len(session.reviewers) + 1
        score_int = score_steps(score, lambda top: _paths_fit(top, n_led, n_nodes))
        return _leads_by_paths(
            reviewer, paper, senior, score_int, slots, n_led, len(session.papers)
        )
    score_int = np.rint(score * SCORE_RESOLUTION).astype(np.int64)
    per_lead, per_senior = lead_costs(score_int, n_led)
    gain = per_lead + per_senior * senior.astype(np.int64) + score_int
    papers_with = np.unique(paper)
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
    paper_ids = list(map(attrgetter("id"), session.papers))
    reviewer_ids = list(map(attrgetter("id"), session.reviewers))
    # Item getters over whole lists and per-paper counts: no Python loop over the rows and no
    # sort (a large venue has tens of thousands of papers).
    lead_of = dict(
        zip(
            map(paper_ids.__getitem__, paper[mask].tolist()),
            map(reviewer_ids.__getitem__, reviewer[mask].tolist()),
            strict=True,
        )
    )
    n_p = len(session.papers)
    has = np.bincount(paper, minlength=n_p) > 0
    led = np.zeros(n_p, dtype=bool)
    led[paper[mask]] = True
    senior_led = np.zeros(n_p, dtype=bool)
    senior_led[paper[mask & session.reviewer_senior_array()[reviewer]]] = True
    no_lead = tuple(map(paper_ids.__getitem__, np.flatnonzero(has & ~led).tolist()))
    no_senior = tuple(map(paper_ids.__getitem__, np.flatnonzero(has & ~senior_led).tolist()))
    return LeadChoice(lead_of=lead_of, no_lead=no_lead, no_senior_lead=no_senior)


def _leads_by_paths(
    reviewer: np.ndarray,
    paper: np.ndarray,
    senior: np.ndarray,
    score_int: np.ndarray,
    slots: np.ndarray,
    n_led: int,
    n_papers: int,
) -> np.ndarray:
    """Which pairs lead, by shortest augmenting paths (`plan.lead_paths`) on the pairs alone.

    Each pair's gain is (`n_led + 1` plus 1 for a senior, score steps), compared
    lexicographically: the first part counts a lead above any difference in senior leads, so
    the least-cost flow leads most papers, then most with seniors, then the best score, in one
    exact solve. 5-7 ms on the loose L benchmark's 60,000 pairs (the cost-scaling
    flow it replaced took three tier solves and 40 ms on the 20,000 pairs it left unsettled).
    """
    # Imported here: the kernel module imports numba, which commands that never choose leads
    # on a large venue should not pay for.
    from review_alloc.plan.lead_paths import lead_paths_kernel

    lead = lead_paths_kernel(
        reviewer.astype(np.int64),
        paper.astype(np.int64),
        (n_led + 1 + senior.astype(np.int64)),
        score_int.astype(np.int64),
        slots.astype(np.int64),
        np.int64(n_papers),
    )
    mask = np.zeros(len(paper), dtype=bool)
    mask[lead[lead >= 0]] = True
    return mask


def with_leads(plan: Plan, choice: LeadChoice) -> Plan:
    """The plan with `lead` set on the chosen assignments and cleared on the others."""
    assignments = [
        a.model_copy(update={"lead": choice.lead_of.get(a.paper) == a.reviewer})
        for a in plan.assignments
    ]
    return plan.model_copy(update={"assignments": assignments})
