"""The "keep earlier pairs" tier of a re-plan: which pair arcs were in the earlier plan, and how
much each is worth so that keeping one outranks any score but never any floor or coverage.

A re-plan ranks required coverage, total coverage and floors first, then the number of pairs of
the earlier plan it keeps, then total score. The tier is a bonus on the pair arcs of earlier
pairs, so it only changes costs; `plan.network` adds it with one hook and widens the weights
above it (see `plan.network.tier_weights`).
"""

from __future__ import annotations

import numpy as np

from review_alloc.model import Plan, Session

COST_LIMIT = 2**62
"""Headroom kept below int64 for every cost sum and potential the engine forms."""


def earlier_pair_mask(
    session: Session, earlier: Plan | None, reviewer: np.ndarray, paper: np.ndarray
) -> np.ndarray:
    """True for each pair arc (reviewer, paper index arrays) that the earlier plan assigned.

    Pairs of the earlier plan whose ids no longer exist are skipped: they cannot be kept.
    """
    mask = np.zeros(len(reviewer), dtype=bool)
    if earlier is None or not earlier.assignments or not len(reviewer):
        return mask
    rid, pid = session.reviewer_index(), session.paper_index()
    n_p = max(len(session.papers), 1)
    known = [
        rid[a.reviewer] * n_p + pid[a.paper]
        for a in earlier.assignments
        if a.reviewer in rid and a.paper in pid
    ]
    if not known:
        return mask
    keys = reviewer.astype(np.int64) * n_p + paper.astype(np.int64)
    return np.isin(keys, np.array(known, dtype=np.int64))


def keep_weight(max_pair_arcs_in_cycle: int, max_score: int) -> int:
    """Worth of one kept pair: more than any simple residual cycle can change the score."""
    return max_pair_arcs_in_cycle * max_score + 1


def fitting_resolution(
    resolution: int, top_score: float, max_pair_arcs_in_cycle: int, total_demand: int
) -> int:
    """The finest score resolution (at most `resolution`) whose keep-tier costs fit int64.

    With the keep tier the floors weight grows like (pair arcs in a cycle)² x max score, which
    for 15,000 reviewers, 60,000 reviews and scores up to 1 at 10,000 steps would pass the
    int64 headroom; the score steps are then made coarser (3,558 per unit for that venue: ties
    finer than a step count as equal) while every count tier stays exact, and the plan's method
    says so. Returns 0 if even one step per unit cannot fit.
    """
    k = max(max_pair_arcs_in_cycle, 1)
    demand = max(total_demand, 1)

    def fits(step: int) -> bool:
        max_score = int(np.rint(top_score * step))
        w_keep = keep_weight(k, max_score)
        w_floor = k * (max_score + w_keep) + 1
        w_coverage = 2 * w_floor
        w_required = 2 * w_coverage
        return (w_required + w_coverage + max_score) * demand * 4 < COST_LIMIT

    if fits(resolution):
        return resolution
    if not fits(1):
        return 0
    low, high = 1, resolution  # fits(low), not fits(high); the sum grows with the step
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return low
