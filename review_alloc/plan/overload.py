"""Allowed overloads: how many papers above cap each reviewer may take, in their own tier.

A chair may let reviewers go above their cap (for everyone with `policy.overload_allowance`, or
per reviewer with `Reviewer.overload`). `plan.network.build_network` gives each such reviewer a
parallel source → reviewer arc above the cap (its last arc block). Each paper above cap costs
`overload` per unit, a tier that sits below coverage and above floors: an overload is taken only
when it covers a review that nobody within their cap can give, and never to meet a floor or to
raise the score.

The tier's weight comes from `weights.constraint_weights`: a simple residual cycle passes the
source once, so it uses at most one overload arc forwards and one backwards and moves the tier
by at most one; its weight exceeds floors and score together, and coverage's exceeds it.
"""

from __future__ import annotations

import numpy as np

from review_alloc.model import Session


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
