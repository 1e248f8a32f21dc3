"""The objective's tier weights: integer costs at one score resolution that fit int64.

The lexicographic objective of the planner is one min-cost flow; these weights make it so
(see `constraint_weights`), and `fitting_weights` picks the finest score step at which they
stay within the engine's integer range.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.plan.errors import PlanInputError

SCORE_RESOLUTION = 10_000
"""Integer cost steps per score unit: a score of 0.8532 becomes 8532 (ties closer than 1e-4 are
treated as equal)."""

COST_LIMIT = 2**62
"""Every cost sum and node potential the engine forms must stay below this (int64 headroom)."""


@dataclass(frozen=True)
class TierWeights:
    """Cost weights of the tiers above the score, highest first (see `constraint_weights`)."""

    required: int
    seniors: int
    coverage: int
    overload: int
    floors: int
    keep: int = 0


def constraint_weights(
    max_pair_arcs_in_cycle: int,
    max_score: int,
    senior_nodes: int,
    balance_spread: int,
    *,
    overload: bool = False,
    keep: bool = False,
) -> TierWeights:
    """Weights for required > seniors > coverage > (least overload) > floors > (kept) > score.

    Why one min-cost flow is then lexicographic: an optimal flow has no negative residual cycle,
    and every flow difference splits into simple residual cycles. With each weight larger than
    everything below it can move in one simple cycle, no cycle can trade a higher tier for lower
    ones. A simple cycle holds at most `max_pair_arcs_in_cycle` pair arcs, so it changes the score
    by at most that many times `max_score`; it passes the source and the sink once, so it moves
    required coverage, coverage, overload and floors by at most one each,
    and it changes the balance penalty by at most `balance_spread` (two source arcs). It may pass
    many papers' senior nodes, but each one once and each beside a reviewer, moving the senior
    tier by at most min(`senior_nodes`, pair arcs in the cycle); the required weight outweighs
    all of that. The overload tier exists only when some reviewer may go above cap.

    A re-plan (`keep`) adds the kept-earlier-pairs tier between floors and score: each kept
    pair is worth more than a cycle can change score and balance together, and a cycle changes
    the kept count by at most its pair arcs, so the floors weight covers that many kept pairs.
    """
    below = max_pair_arcs_in_cycle * max_score + balance_spread + 1
    kept = below if keep else 0
    floors = max_pair_arcs_in_cycle * kept + below
    over = 2 * floors if overload else 0
    coverage = 2 * (over or floors)
    seniors = 2 * coverage
    required = (min(senior_nodes, max_pair_arcs_in_cycle) + 1) * seniors
    return TierWeights(
        required=required,
        seniors=seniors,
        coverage=coverage,
        overload=over,
        floors=floors,
        keep=kept,
    )


def fitting_weights(
    top_score: float,
    balance: float,
    cycle_arcs: int,
    senior_nodes: int,
    max_cap: int,
    total_demand: int,
    n_nodes: int,
    *,
    overload: bool,
    keep: bool,
) -> tuple[int, TierWeights]:
    """The finest score resolution (at most SCORE_RESOLUTION) whose tier weights fit int64.

    Every cost sum and potential the engine forms stays below 2**62 when the heaviest path
    cost times the total demand does. Large venues with a senior rule or a re-plan's keep tier
    can pass that at 10,000 steps per unit; the score steps are then made coarser (ties finer
    than a step count as equal) while every count tier stays exact, and the plan's method says
    so. A session that does not fit even at one step per unit is refused.
    """

    def weights(steps: int) -> TierWeights:
        step = int(round(balance * steps))
        return constraint_weights(
            cycle_arcs,
            int(np.rint(top_score * steps)),
            senior_nodes,
            2 * step * max(max_cap - 1, 0),
            overload=overload,
            keep=keep,
        )

    per_arc = COST_LIMIT // (4 * n_nodes + 8)  # the engine's bound, so potentials cannot overflow

    def fits(steps: int) -> bool:
        w = weights(steps)
        heaviest = w.required + w.coverage + int(np.rint(top_score * steps)) + w.keep
        return heaviest <= per_arc and heaviest * max(total_demand, 1) * 4 < COST_LIMIT

    if fits(SCORE_RESOLUTION):
        return SCORE_RESOLUTION, weights(SCORE_RESOLUTION)
    if not fits(1):
        raise PlanInputError(
            [
                "scores: the objective's weights are too large to plan exactly (a wide score "
                "range, or very many papers with a senior rule); rescale scores to 0..1"
            ]
        )
    low, high = 1, SCORE_RESOLUTION  # fits(low), not fits(high): the weights grow with steps
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return low, weights(low)
