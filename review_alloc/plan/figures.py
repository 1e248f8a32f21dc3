"""The objective figures of a plan, recomputed from its assignments alone."""

from __future__ import annotations

from itertools import repeat
from operator import attrgetter

import numpy as np

from review_alloc.model import PlanFigures, Session


def loads_and_counts(
    session: Session, reviewer: np.ndarray, paper: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Per-reviewer loads and per-paper review counts of the given assignment index arrays."""
    loads = np.bincount(reviewer, minlength=len(session.reviewers)).astype(np.int64)
    counts = np.bincount(paper, minlength=len(session.papers)).astype(np.int64)
    return loads, counts


def active_demands(session: Session) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(reviews, min_reviews, cap, floor) arrays with withdrawn papers and reviewers at zero."""
    reviews = session.paper_reviews_array().astype(np.int64)
    minimum = session.paper_min_reviews_array().astype(np.int64)
    cap = session.reviewer_cap_array().astype(np.int64)
    floor = session.reviewer_floor_array().astype(np.int64)
    gone_p = np.array([p.withdrawn for p in session.papers], dtype=bool)
    gone_r = np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    reviews[gone_p] = 0
    minimum[gone_p] = 0
    cap[gone_r] = 0
    floor[gone_r] = 0
    return reviews, minimum, cap, floor


def plan_figures(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    *,
    demands: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None = None,
) -> PlanFigures:
    """Tier figures of DESIGN.md's objective for assignments given as index arrays
    (`demands`: the session's `active_demands` when already computed)."""
    loads, counts = loads_and_counts(session, reviewer, paper)
    reviews, minimum, _, floor = active_demands(session) if demands is None else demands
    return PlanFigures(
        required_coverage=int(np.minimum(counts, minimum).sum()),
        required_demand=int(minimum.sum()),
        coverage=int(np.minimum(counts, reviews).sum()),
        demand=int(reviews.sum()),
        floors_met=int(np.minimum(loads, floor).sum()),
        floors_demand=int(floor.sum()),
        total_score=round(float(np.sum(score)), 6),
        assigned=int(len(reviewer)),
    )


def assignment_arrays(
    session: Session, plan_assignments: list
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(reviewer, paper, score) index arrays of a plan's assignments; -1 for an unknown id."""
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    n = len(plan_assignments)
    # map() with a default and attribute getters beat comprehensions over tens of thousands
    # of rows.
    reviewer = np.fromiter(
        map(reviewer_at.get, map(attrgetter("reviewer"), plan_assignments), repeat(-1, n)),
        dtype=np.int64,
        count=n,
    )
    paper = np.fromiter(
        map(paper_at.get, map(attrgetter("paper"), plan_assignments), repeat(-1, n)),
        dtype=np.int64,
        count=n,
    )
    score = np.fromiter(map(attrgetter("score"), plan_assignments), dtype=np.float64, count=n)
    return reviewer, paper, score


def assignment_indices(session: Session, plan_assignments: list) -> tuple[np.ndarray, ...]:
    """(reviewer, paper, score) index arrays of a plan's assignments; unknown ids raise KeyError."""
    reviewer, paper, score = assignment_arrays(session, plan_assignments)
    for k in np.flatnonzero((reviewer < 0) | (paper < 0)).tolist():
        a = plan_assignments[k]
        raise KeyError(a.reviewer if reviewer[k] < 0 else a.paper)
    return reviewer, paper, score
