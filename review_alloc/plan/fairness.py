"""Fairness for the worst-off pair: the bottleneck score, found by threshold search and max flow.

The bottleneck option maximises the lowest score among the assigned (unpinned) pairs, subject to
the tiers above it (required coverage, seniors, coverage) staying at their optimum; floors and
the total score are then optimised with the pairs below that threshold left out. Keeping only
pairs scoring at least t can only lower the top tiers as t rises, so the best t is found by
binary search over the sorted distinct scores. At each step a Dinic maximum flow
(`review_alloc.flow.max_flow`) on the thresholded network tells whether required coverage and
coverage can still be reached; the planner then confirms the top tiers with a min-cost solve
and searches lower if the senior tier or an institution split lost something.

Lifting the weakest papers' *total* score (the max-min objective of Stelmakh, Shah and Singh's
PeerReview4All) is not done here: a lower bound on every paper's total score is a side
constraint on arc costs, not a capacity, so it is not a flow problem, and those authors show the
exact problem is NP-hard. `plan.fair` offers it as a separate plan: exact by a MIP (HiGHS) where
that finishes in time, else PeerReview4All's first round, named as such and shown with an upper
bound and the gap to it, never under an exact-sounding name.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from review_alloc.flow import InfeasibleError, max_flow
from review_alloc.plan.network import PlanNetwork
from review_alloc.plan.weights import SCORE_RESOLUTION


def score_thresholds(net: PlanNetwork) -> np.ndarray:
    """Distinct scores of the unpinned eligible pairs, ascending: the candidate bottlenecks."""
    free = ~net.pair_pinned if len(net.pair_pinned) else np.ones(len(net.pair_score), bool)
    return np.unique(np.rint(net.pair_score[free] * SCORE_RESOLUTION)) / SCORE_RESOLUTION


def coverage_flows(net: PlanNetwork, threshold: float | None) -> tuple[int, int]:
    """(required coverage, coverage) reachable with unpinned pairs scoring >= threshold.

    Two Dinic max flows on the planner's own network without its return arc: one with only the
    required paper → sink arcs open, one with all of them. Senior lower bounds are dropped here
    (the planner's min-cost solve confirms the senior tier), pins keep theirs.
    """
    caps = net.capacities.copy()
    lower = net.lower.copy()
    lower[net.senior_required_arcs] = 0
    if threshold is not None:
        pair_caps = caps[net.pair_arcs]
        low = (net.pair_score < threshold - 0.5 / SCORE_RESOLUTION) & ~net.pair_pinned
        pair_caps[low] = 0
        caps[net.pair_arcs] = pair_caps
    keep = np.ones(len(caps), dtype=bool)
    keep[net.return_arc] = False
    values = []
    for open_extra in (False, True):
        c = caps.copy()
        if not open_extra:
            c[net.extra_arcs] = 0
        try:
            result = max_flow(
                net.n_nodes,
                net.tails[keep],
                net.heads[keep],
                c[keep],
                net.source,
                net.sink,
                lower=lower[keep],
            )
        except InfeasibleError:
            values.append(-1)
            continue
        values.append(int(result.value))
    return values[0], values[1]


def highest_threshold(
    thresholds: np.ndarray, reaches: Callable[[float], bool], start: int = 0
) -> int:
    """Index of the highest threshold for which `reaches` holds, assuming it holds at `start` and
    is monotone (true up to some index, false after)."""
    lo, hi = start, len(thresholds) - 1
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if reaches(float(thresholds[mid])):
            lo = mid
        else:
            hi = mid - 1
    return lo
