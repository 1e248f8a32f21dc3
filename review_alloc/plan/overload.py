"""Allowed overloads: parallel source → reviewer arcs above the cap, in their own objective tier.

A chair may let reviewers go above their cap (for everyone with `policy.overload_allowance`, or
per reviewer with `Reviewer.overload`). Each paper above cap costs `overload` per unit, a tier
that sits below coverage and above floors: an overload is taken only when it covers a review
that nobody within their cap can give, and never to meet a floor or to raise the score.

Tier weights with overloads, from the floors weight F of `tier_weights`: overload 2F,
coverage 4F, required coverage 8F. A simple residual cycle passes the source once, so it uses
at most one overload arc forwards and one backwards, changes each tier count by at most one and
the score by less than F; each weight is larger than the sum of everything below it, which keeps
the objective lexicographic (the argument of `tier_weights`, with one more tier).
"""

from __future__ import annotations

import dataclasses
from typing import TYPE_CHECKING

import numpy as np

from review_alloc.model import Session
from review_alloc.plan.errors import PlanInputError

if TYPE_CHECKING:
    from review_alloc.plan.network import PlanNetwork

_COST_LIMIT = 2**62


def overload_allowances(session: Session) -> np.ndarray:
    """Papers above cap each reviewer may take (own value, else the policy's; 0 if withdrawn)."""
    default = session.policy.overload_allowance
    allowance = np.fromiter(
        (default if r.overload is None else r.overload for r in session.reviewers),
        dtype=np.int64,
        count=len(session.reviewers),
    )
    allowance[np.array([r.withdrawn for r in session.reviewers], dtype=bool)] = 0
    return allowance


def add_overload_arcs(session: Session, net: PlanNetwork) -> PlanNetwork:
    """The network with overload arcs appended and tiers re-weighted; unchanged if none allowed."""
    allowance = overload_allowances(session)
    if not allowance.any():
        return net
    w_required, w_coverage, w_floor = net.weights
    # The floors weight already exceeds any score change of one cycle (see tier_weights).
    w_overload = 2 * w_floor
    new_coverage = 2 * w_overload
    new_required = 2 * new_coverage
    total = int(net.capacities[net.return_arc])
    if (new_required + new_coverage + net.max_score) * max(total, 1) * 4 >= _COST_LIMIT:
        raise PlanInputError(
            ["scores: the score range is too wide to plan overloads exactly; rescale scores"]
        )
    costs = net.costs.copy()
    costs[net.required_arcs] = -(new_required + new_coverage + net.max_score)
    costs[net.extra_arcs] = -(new_coverage + net.max_score)

    reviewers = np.flatnonzero(allowance > 0)
    start = len(net.tails)
    return dataclasses.replace(
        net,
        tails=np.concatenate([net.tails, np.full(len(reviewers), net.source, np.int64)]),
        heads=np.concatenate([net.heads, 1 + reviewers.astype(np.int64)]),
        capacities=np.concatenate([net.capacities, allowance[reviewers]]),
        lower=np.concatenate([net.lower, np.zeros(len(reviewers), np.int64)]),
        costs=np.concatenate([costs, np.full(len(reviewers), w_overload, np.int64)]),
        weights=(new_required, new_coverage, w_floor),
        overload_arcs=slice(start, start + len(reviewers)),
        overload_reviewers=reviewers.astype(np.int64),
    )
