"""Allowed overloads: parallel source → reviewer arcs above the cap, in their own objective tier.

A chair may let reviewers go above their cap (for everyone with `policy.overload_allowance`, or
per reviewer with `Reviewer.overload`). Each paper above cap costs `overload` per unit, a tier
that sits below coverage and above floors: an overload is taken only when it covers a review
that nobody within their cap can give, and never to meet a floor or to raise the score.

The tier's weight comes from `network.constraint_weights`: a simple residual cycle passes the
source once, so it uses at most one overload arc forwards and one backwards and moves the tier
by at most one; its weight exceeds floors and score together, and coverage's exceeds it.
"""

from __future__ import annotations

import dataclasses
from typing import TYPE_CHECKING

import numpy as np

from review_alloc.model import Session

if TYPE_CHECKING:
    from review_alloc.plan.network import PlanNetwork

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


def add_overload_arcs(session: Session, net: PlanNetwork, weight: int) -> PlanNetwork:
    """The network with overload arcs (cost `weight` per paper above cap) appended."""
    allowance = overload_allowances(session)
    if not allowance.any():
        return net
    reviewers = np.flatnonzero(allowance > 0)
    start = len(net.tails)
    return dataclasses.replace(
        net,
        tails=np.concatenate([net.tails, np.full(len(reviewers), net.source, np.int64)]),
        heads=np.concatenate([net.heads, 1 + reviewers.astype(np.int64)]),
        capacities=np.concatenate([net.capacities, allowance[reviewers]]),
        lower=np.concatenate([net.lower, np.zeros(len(reviewers), np.int64)]),
        costs=np.concatenate([net.costs, np.full(len(reviewers), weight, np.int64)]),
        overload_arcs=slice(start, start + len(reviewers)),
        overload_reviewers=reviewers.astype(np.int64),
    )
