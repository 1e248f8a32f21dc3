"""The "keep earlier pairs" tier of a re-plan: which pair arcs were in the earlier plan, and how
much each is worth so that keeping one outranks any score but never any floor or coverage.

A re-plan ranks required coverage, total coverage and floors first, then the number of pairs of
the earlier plan it keeps, then total score. The tier is a bonus on the pair arcs of earlier
pairs, so it only changes costs; `plan.network` adds it with one hook and widens the weights
above it (see `plan.weights.constraint_weights` and `fitting_weights`).
"""

from __future__ import annotations

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.figures import assignment_arrays
from review_alloc.plan.pairkeys import contains, pair_keys


def earlier_pair_mask(
    session: Session, earlier: Plan | None, reviewer: np.ndarray, paper: np.ndarray
) -> np.ndarray:
    """True for each pair arc (reviewer, paper index arrays) that the earlier plan assigned.

    Pairs of the earlier plan whose ids no longer exist are skipped: they cannot be kept.
    """
    mask = np.zeros(len(reviewer), dtype=bool)
    if earlier is None or not earlier.assignments or not len(reviewer):
        return mask
    n_p = max(len(session.papers), 1)
    j, i, _ = assignment_arrays(session, earlier.assignments)
    known = (j >= 0) & (i >= 0)
    if not known.any():
        return mask
    return contains(pair_keys(reviewer, paper, n_p), pair_keys(j[known], i[known], n_p))
