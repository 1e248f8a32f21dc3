"""The senior rule in the network: seniors wanted per paper, the senior nodes and their arcs.

A paper with a senior rule gets one senior node between its senior reviewers and the paper;
its arcs to the paper carry the senior tier (or, when the rule is hard, a lower bound).
"""

from __future__ import annotations

import numpy as np

from review_alloc.model import Session

ArcArrays = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray | None]
"""(tails, heads, capacities, costs, lower or None) of one block of arcs."""


def paper_senior_need(session: Session) -> np.ndarray:
    """Seniors wanted per paper: its own `senior_min`, else the policy's; clamped to its reviews,
    0 for withdrawn papers."""
    own = np.fromiter(
        (-1 if p.senior_min is None else p.senior_min for p in session.papers),
        dtype=np.int64,
        count=len(session.papers),
    )
    need = np.where(own < 0, session.policy.senior_min, own)
    need = np.minimum(need, session.paper_reviews_array())
    need[np.array([p.withdrawn for p in session.papers], dtype=bool)] = 0
    return need.astype(np.int64)


def senior_nodes(
    session: Session, reviewer: np.ndarray, paper: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(senior papers, their need, per pair the senior node index or -1)."""
    need = paper_senior_need(session)
    senior_papers = np.flatnonzero(need > 0).astype(np.int64)
    index_of = np.full(len(session.papers), -1, dtype=np.int64)
    index_of[senior_papers] = np.arange(len(senior_papers))
    is_senior = session.reviewer_senior_array()
    pair_senior = np.where(is_senior[reviewer], index_of[paper], -1) if len(paper) else paper
    return senior_papers, need[senior_papers], pair_senior.astype(np.int64)


def senior_arcs(
    senior_papers: np.ndarray,
    need: np.ndarray,
    reviews: np.ndarray,
    first_node: int,
    first_paper_node: int,
    w_seniors: int,
    hard: bool,
) -> tuple[ArcArrays, ArcArrays]:
    """Senior node → paper: [0, need] at -w_seniors (lower bound `need` when the rule is hard),
    and [0, reviews] at 0 for seniors beyond the need; two blocks, required first."""
    n = len(senior_papers)
    nodes = first_node + np.arange(n, dtype=np.int64)
    targets = first_paper_node + senior_papers
    required = (nodes, targets, need, np.full(n, -w_seniors), need if hard else None)
    rest = (nodes, targets, reviews[senior_papers], np.zeros(n), None)
    return required, rest
