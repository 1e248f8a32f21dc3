"""A Plan from chosen pairs, leads picked and figures counted (randomised and fair plans).

The plain planner's decoded flow (`plan.solve`) and the plans that are not one min-cost flow
(a draw, the fairest plan) are all assembled here, then handed to the independent checker.
A re-plan of the same entities may hand in the earlier plan's rows (`PlanRows`): unchanged
assignments are then the earlier (immutable) objects, and only the changed ones are built.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

import numpy as np

from review_alloc.model import Assignment, Plan, Session
from review_alloc.model.plans import trusted_assignments, trusted_plan
from review_alloc.plan.figures import plan_figures
from review_alloc.plan.leads import LeadChoice, lead_choice, lead_mask


@dataclass(frozen=True)
class PlanRows:
    """A plan's assignments with their positions: reviewer, paper (session positions), score
    and lead per row, in the plan's order (by paper, then reviewer)."""

    reviewer: np.ndarray
    paper: np.ndarray
    score: np.ndarray
    lead: np.ndarray
    assignments: list[Assignment]


def _row_keys(rows_reviewer: np.ndarray, rows_paper: np.ndarray, n_reviewers: int) -> np.ndarray:
    # Paper-major keys: a plan's rows are sorted by (paper, reviewer), so these increase.
    return rows_paper.astype(np.int64) * max(n_reviewers, 1) + rows_reviewer


def _assignments(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    lead: np.ndarray,
    reuse: PlanRows | None,
) -> list[Assignment]:
    """The rows as Assignment objects, taking equal rows of `reuse` as they are."""
    if reuse is None or not len(reuse.reviewer) or not len(reviewer):
        paper_ids = [p.id for p in session.papers]
        reviewer_ids = [r.id for r in session.reviewers]
        return trusted_assignments(
            [paper_ids[i] for i in paper.tolist()],
            [reviewer_ids[j] for j in reviewer.tolist()],
            score.tolist(),
            lead.tolist(),
        )
    n_r = len(session.reviewers)
    old = _row_keys(reuse.reviewer, reuse.paper, n_r)
    at = np.minimum(np.searchsorted(old, _row_keys(reviewer, paper, n_r)), len(old) - 1)
    same = (
        (reuse.reviewer[at] == reviewer)
        & (reuse.paper[at] == paper)
        & (reuse.lead[at] == lead)
        & (reuse.score[at] == score)
    )
    new = np.flatnonzero(~same)
    made: list[Assignment] = []
    if len(new):
        made = trusted_assignments(
            [session.papers[i].id for i in paper[new].tolist()],
            [session.reviewers[j].id for j in reviewer[new].tolist()],
            score[new].tolist(),
            lead[new].tolist(),
        )
    # The rows come in runs of earlier rows at consecutive places, broken only where a row
    # is new or an earlier one left: each run is one slice of the earlier list (a few
    # thousand slices, not 60 k item lookups).
    breaks = np.flatnonzero(
        np.concatenate(([True], ~same[1:] | ~same[:-1] | (at[1:] != at[:-1] + 1)))
    )
    ends = np.append(breaks[1:], len(at)).tolist()
    earlier = reuse.assignments
    out: list[Assignment] = []
    k_new = 0
    for first, end, fresh, where in zip(
        breaks.tolist(), ends, (~same[breaks]).tolist(), at[breaks].tolist(), strict=True
    ):
        if fresh:
            # A new row is a run of its own.
            out.append(made[k_new])
            k_new += 1
        else:
            out.extend(earlier[where : where + end - first])
    return out


def paper_major_order(reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    """`np.lexsort((reviewer, paper))`: the rows by paper, then reviewer.

    The decoded flow lists its pairs by reviewer already (the network's pair order): a stable
    sort by paper alone then gives the same order, and numpy sorts 16-bit keys stably by radix
    in linear time (a tenth of the lexsort's time on 60 k rows). Larger keys take two radix
    passes, low half first; rows in any other order take the lexsort.
    """
    reviewer = np.asarray(reviewer)
    paper = np.asarray(paper, dtype=np.int64)
    if len(paper) < 2 or not bool(np.all(reviewer[1:] >= reviewer[:-1])):
        return np.lexsort((reviewer, paper))
    if int(paper.min()) < 0:
        return np.lexsort((reviewer, paper))
    top = int(paper.max())
    if top < 1 << 16:
        return np.argsort(paper.astype(np.uint16), kind="stable")
    if top < 1 << 32:
        low = np.argsort((paper & 0xFFFF).astype(np.uint16), kind="stable")
        high = np.argsort((paper[low] >> 16).astype(np.uint16), kind="stable")
        return low[high]
    return np.lexsort((reviewer, paper))


def assemble_rows(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    now: datetime,
    method: str,
    reuse: PlanRows | None = None,
    demands: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None = None,
) -> tuple[Plan, LeadChoice | None, PlanRows]:
    """`assemble_plan`, also returning the plan's rows; `reuse` (rows of a plan of a session
    with the same reviewers and papers, in the same order) supplies unchanged assignments, and
    `demands` the session's `active_demands` when already computed."""
    order = paper_major_order(reviewer, paper)
    reviewer, paper, score = reviewer[order], paper[order], score[order]
    lead = np.zeros(len(paper), dtype=bool)
    leads = None
    if session.policy.max_leads > 0:
        lead = lead_mask(session, reviewer, paper, score)
        leads = lead_choice(session, reviewer, paper, lead)
    lead = np.asarray(lead, dtype=bool)
    assignments = _assignments(session, reviewer, paper, score, lead, reuse)
    figures = plan_figures(session, reviewer, paper, score, demands=demands)
    rows = PlanRows(reviewer, paper, score, lead, assignments)
    return trusted_plan(assignments, figures, now, method), leads, rows


def assemble_plan(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    now: datetime,
    method: str,
) -> tuple[Plan, LeadChoice | None]:
    """The unchecked plan of the given pairs (session positions), leads chosen when asked for."""
    plan, leads, _ = assemble_rows(session, reviewer, paper, score, now, method)
    return plan, leads
